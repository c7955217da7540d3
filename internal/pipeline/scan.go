package pipeline

import (
	"io/fs"
	"path/filepath"
	"strings"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/dicom"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/io/sidecar"
	"github.com/tauvox/tauvox/volume"
)

// ScanEntry is one series found by Scan (the rows of tauvox scan).
type ScanEntry struct {
	ID          string    `json:"id"`
	Format      string    `json:"format"`
	Path        string    `json:"path,omitempty"`
	Description string    `json:"description"`
	Varying     string    `json:"varying"`
	Values      []float64 `json:"values"`
	Matrix      [2]int    `json:"matrix"`
	Slices      int       `json:"slices"`
	Volumes     int       `json:"volumes"`
	Model       string    `json:"model"`
	Problem     string    `json:"problem,omitempty"`
	Notes       []string  `json:"notes,omitempty"`
	// Fixed lists the parameters every image of a DICOM series shares
	// ("TI 300 ms, TR 6000 ms, ..."); Joins the series a protocol row
	// joins (one series per TI, flip angle, TE or TR).
	Fixed    string   `json:"fixed,omitempty"`
	Joins    []string `json:"joins,omitempty"`
	Scanner  string   `json:"scanner,omitempty"`
	Acquired string   `json:"acquired,omitempty"`
	Field    *float64 `json:"field_T,omitempty"`
	// Identifiers (patient name, ID, birth date, accession number) are
	// filled only with --keep-identifiers.
	Identifiers *dicom.Identifiers `json:"identifiers,omitempty"`
}

// ScanResult is what Scan found under the paths.
type ScanResult struct {
	Series     []ScanEntry     `json:"series"`
	Files      int             `json:"dicom_files"`
	Skipped    int             `json:"skipped_files"`
	Unreadable int             `json:"unreadable_files"`
	Ignored    int             `json:"ignored"`
	Problems   []dicom.Problem `json:"problems"`
}

// Scan finds the DICOM series (io/dicom.Scan with opt) and the NIfTI
// series with their sidecars under the paths, each with what varies
// (volume.Varying) and the model the registry suggests.
func Scan(paths []string, opt *dicom.ScanOptions) (*ScanResult, error) {
	cat, err := dicom.Scan(paths, opt)
	if err != nil {
		return nil, err
	}
	res := ScanResult{Files: cat.Files, Skipped: cat.Skipped, Unreadable: cat.Unreadable, Ignored: cat.Ignored, Problems: cat.Problems}
	for _, s := range cat.Series {
		en := ScanEntry{ID: s.ID, Format: "dicom", Description: s.Description, Varying: s.Varying, Values: s.Values,
			Matrix: [2]int{s.Columns, s.Rows}, Slices: s.Slices, Volumes: s.Volumes, Model: suggest(s.Varying, s.Echo), Problem: s.Problem,
			Notes: s.Notes, Fixed: s.Fixed, Scanner: s.Source.Scanner, Acquired: s.Source.AcquiredAt, Identifiers: s.Identifiers}
		if f := s.Source.FieldStrength; f > 0 {
			en.Field = &f
		}
		res.Series = append(res.Series, en)
	}
	for _, p := range cat.Protocols {
		m0, _ := cat.Lookup(p.Series[0])
		en := ScanEntry{ID: p.ID, Format: "dicom", Description: p.Description, Varying: p.Varying, Values: p.Values,
			Matrix: [2]int{p.Columns, p.Rows}, Slices: p.Slices, Volumes: p.Volumes, Problem: p.Problem, Joins: p.Series}
		if m0 != nil {
			en.Model = suggest(p.Varying, p.Echo)
			en.Scanner, en.Acquired = m0.Source.Scanner, m0.Source.AcquiredAt
			if f := m0.Source.FieldStrength; f > 0 {
				en.Field = &f
			}
		}
		res.Series = append(res.Series, en)
	}
	nii := niftiEntries(paths)
	res.Series = append(res.Series, nii...)
	res.Skipped -= len(nii) // NIfTI files are not "other files"
	if res.Skipped < 0 {
		res.Skipped = 0
	}
	return &res, nil
}

// niftiEntries lists the NIfTI series under the paths (headers and
// sidecars only).
func niftiEntries(paths []string) []ScanEntry {
	var out []ScanEntry
	visit := func(p string) {
		if !series.IsNIfTI(p) || strings.HasSuffix(p, ".img") {
			return
		}
		h, err := nifti.ReadHeader(p)
		en := ScanEntry{ID: p, Format: "nifti", Path: p, Description: filepath.Base(p)}
		if err != nil {
			en.Problem = err.Error()
			out = append(out, en)
			return
		}
		d := h.Dims()
		en.Matrix, en.Slices, en.Volumes = [2]int{d[0], d[1]}, d[2], d[3]
		if en.Volumes < 2 {
			return // a map, not a series
		}
		if sc, ok := sidecar.ForImage(p); ok {
			s, err := sidecar.Read(sc)
			if err != nil {
				en.Problem = err.Error()
			} else if acq, err := s.Acquisitions(en.Volumes); err != nil {
				en.Problem = err.Error()
			} else {
				if v := volume.Varying(acq); len(v) > 0 {
					en.Varying, en.Values, en.Model = v[0].Name, v[0].Values, suggest(v[0].Name, "SE")
				}
				if s.SeriesDescription != "" {
					en.Description = s.SeriesDescription
				}
			}
		} else {
			en.Notes = []string{"no sidecar: give --te/--ti/--tr/--fa to fit"}
		}
		out = append(out, en)
	}
	for _, root := range paths {
		filepath.WalkDir(root, func(p string, d fs.DirEntry, err error) error {
			if err == nil && !d.IsDir() {
				visit(p)
			}
			return nil
		})
	}
	return out
}

// suggest returns the registry's model for a series whose parameter
// varying varies, with echo "SE" or "GR" telling spin from gradient echoes
// ("" when the headers do not say: no model is suggested for an echo
// train then).
func suggest(varying, echo string) string {
	if varying == "EchoTime" && echo == "" {
		return ""
	}
	seq := fit.SeqSpinEcho
	if echo == "GR" {
		seq = fit.SeqGradientEcho
	}
	return fit.Suggest(varying, seq)
}
