package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"text/tabwriter"
	"unicode"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/dicom"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/io/sidecar"
	"github.com/tauvox/tauvox/volume"
)

// scanEntry is one series found by scan.
type scanEntry struct {
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
	Scanner     string    `json:"scanner,omitempty"`
	Acquired    string    `json:"acquired,omitempty"`
	Field       *float64  `json:"field_T,omitempty"`
	// Identifiers (patient name, ID, birth date, accession number) are
	// filled only with --keep-identifiers.
	Identifiers *dicom.Identifiers `json:"identifiers,omitempty"`
}

type scanResult struct {
	Series     []scanEntry     `json:"series"`
	Files      int             `json:"dicom_files"`
	Skipped    int             `json:"skipped_files"`
	Unreadable int             `json:"unreadable_files"`
	Ignored    int             `json:"ignored"`
	Problems   []dicom.Problem `json:"problems"`
}

func runScan(_ context.Context, args []string, e *env) error {
	var asJSON, localizers, derived, keepIDs bool
	fs := newFlags("scan", "PATH... [--json]",
		`Finds every series under the paths — DICOM files recognised by content in
folders searched recursively, and NIfTI files with their BIDS sidecars — and
prints one row per series: id, description, what varies (TE, TI, flip angle,
TR) and its values, matrix, slices, volumes and a suggested model. Give the id
to 'tauvox fit PATH --series ID'. Files that cannot be read are listed with the
reason; the scan goes on with the rest.`, e)
	fs.BoolVar(&asJSON, "json", false, "machine-readable output")
	fs.BoolVar(&localizers, "localizers", false, "include localizer images")
	fs.BoolVar(&derived, "derived", false, "include derived images")
	fs.BoolVar(&keepIDs, "keep-identifiers", false, "show the patient name, ID, birth date and accession number of DICOM series (left out by default)")
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
		return err
	}
	if len(pos) == 0 {
		return errors.New("give at least one file or folder (see --help)")
	}
	for _, p := range pos {
		if _, err := os.Stat(p); err != nil {
			return err
		}
	}
	cat, err := dicom.Scan(pos, &dicom.ScanOptions{Localizers: localizers, Derived: derived, KeepIdentifiers: keepIDs})
	if err != nil {
		return err
	}
	res := scanResult{Files: cat.Files, Skipped: cat.Skipped, Unreadable: cat.Unreadable, Ignored: cat.Ignored, Problems: cat.Problems}
	for _, s := range cat.Series {
		en := scanEntry{ID: s.ID, Format: "dicom", Description: s.Description, Varying: s.Varying, Values: s.Values,
			Matrix: [2]int{s.Columns, s.Rows}, Slices: s.Slices, Volumes: s.Volumes, Model: suggest(s.Varying, s.Echo), Problem: s.Problem,
			Notes: s.Notes, Scanner: s.Source.Scanner, Acquired: s.Source.AcquiredAt, Identifiers: s.Identifiers}
		if f := s.Source.FieldStrength; f > 0 {
			en.Field = &f
		}
		res.Series = append(res.Series, en)
	}
	nii := niftiEntries(pos)
	res.Series = append(res.Series, nii...)
	res.Skipped -= len(nii) // NIfTI files are not "other files"
	if res.Skipped < 0 {
		res.Skipped = 0
	}
	if asJSON {
		b, _ := json.MarshalIndent(res, "", "  ")
		fmt.Fprintln(e.stdout, string(b))
		return nil
	}
	tw := tabwriter.NewWriter(e.stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "id\tdescription\tvaries\tvalues\tmatrix\tslices\tvolumes\tmodel\t")
	for _, s := range res.Series {
		model := s.Model
		if s.Problem != "" {
			model = "(cannot load: " + oneLine(s.Problem) + ")"
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%dx%d\t%d\t%d\t%s\t\n", s.ID, clip(printable(oneLine(s.Description)), 40), s.Varying, valueList(s.Values),
			s.Matrix[0], s.Matrix[1], s.Slices, s.Volumes, model)
	}
	tw.Flush()
	fmt.Fprintf(e.stdout, "%d series; %d DICOM files, %d other files skipped, %d unreadable, %d localizer/derived left out\n",
		len(res.Series), res.Files, res.Skipped, res.Unreadable, res.Ignored)
	for _, s := range res.Series {
		if id := s.Identifiers; id != nil {
			fmt.Fprintf(e.stdout, "  identifiers of %s: name %q, ID %q, birth date %q, accession %q\n", s.ID,
				id.PatientName, id.PatientID, id.PatientBirthDate, id.AccessionNumber)
		}
	}
	for _, p := range res.Problems {
		fmt.Fprintln(e.stdout, "  problem: "+printable(oneLine(p.String())))
	}
	return nil
}

// printable replaces control and format characters (a terminal escape
// sequence in a series description, say) and invalid UTF-8 with U+FFFD.
func printable(s string) string {
	return strings.Map(func(r rune) rune {
		if unicode.IsControl(r) || unicode.Is(unicode.Cf, r) {
			return unicode.ReplacementChar
		}
		return r
	}, strings.ToValidUTF8(s, "\uFFFD"))
}

func clip(s string, n int) string {
	r := []rune(s)
	if len(r) > n {
		return string(r[:n-1]) + "…"
	}
	return s
}

func valueList(v []float64) string {
	if len(v) == 0 {
		return "-"
	}
	var parts []string
	for i, x := range v {
		if len(v) > 8 && i == 3 {
			parts = append(parts, "…")
			i = len(v) - 2
			parts = append(parts, fmt.Sprintf("%g", v[len(v)-2]), fmt.Sprintf("%g", v[len(v)-1]))
			break
		}
		parts = append(parts, fmt.Sprintf("%g", x))
	}
	return strings.Join(parts, ",")
}

// niftiEntries lists the NIfTI series under the paths (headers and
// sidecars only).
func niftiEntries(paths []string) []scanEntry {
	var out []scanEntry
	visit := func(p string) {
		if !series.IsNIfTI(p) || strings.HasSuffix(p, ".img") {
			return
		}
		h, err := nifti.ReadHeader(p)
		en := scanEntry{ID: p, Format: "nifti", Path: p, Description: filepath.Base(p)}
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
