package series

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/io/dicom"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/sidecar"
	"github.com/tauvox/tauvox/volume"
)

// Overrides are acquisition parameters given by the user (ms, degrees).
// A nil list keeps what the sidecar or the DICOM headers say; a list of
// one value applies to every volume; otherwise a list needs one value per
// volume. Series chooses a DICOM series by its ID (see tauvox scan) when
// the path holds several.
type Overrides struct {
	TE, TI, TR, FA []float64
	// Series names one DICOM series or protocol by its ID, or several
	// series to join into one protocol, separated by commas ("3,4,5").
	Series string
	// Needs is the acquisition parameter the model varies
	// ("InversionTime", ...): when a folder holds several candidate
	// series or protocols and Series is empty, the one varying it is
	// chosen.
	Needs string
	// KeepIdentifiers keeps the patient identifiers of a DICOM series in
	// Image.Source.Patient (left out by default).
	KeepIdentifiers bool
	// Notices receives one line for every list that replaced different
	// values of the sidecar or the DICOM headers, naming both.
	Notices []string
	// Derived reads DICOM images whose ImageType is DERIVED (left out by
	// default); the image then carries a warning saying so.
	Derived bool
}

// Input describes one file read to make a series (volume.Input).
type Input = volume.Input

// IsNIfTI reports whether a path names a NIfTI file by its extension.
func IsNIfTI(path string) bool {
	for _, ext := range []string{".nii", ".nii.gz", ".hdr", ".img"} {
		if strings.HasSuffix(strings.ToLower(path), ext) {
			return true
		}
	}
	return false
}

// Load reads the series at path: a NIfTI file (with the sidecar beside it,
// same name .json, when present), or a DICOM folder or file (a folder is
// searched recursively; with several series o.Series chooses one). o then
// replaces any parameter it lists. It returns the image and the files read.
func Load(path string, o *Overrides) (*volume.Image, []Input, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, nil, err
	}
	if st.IsDir() || !IsNIfTI(path) {
		im, inputs, err := loadDICOM(path, o)
		if err != nil {
			return nil, nil, err
		}
		if o != nil {
			if err := applyTo(im.Acq, o, path, "the DICOM headers"); err != nil {
				return nil, nil, err
			}
		}
		return im, inputs, nil
	}
	if o != nil && o.Series != "" {
		return nil, nil, fmt.Errorf("%s: --series applies to DICOM folders, not to a NIfTI file", path)
	}
	im, err := nifti.Read(path)
	if err != nil {
		return nil, nil, err
	}
	acq, inputs, err := NIfTIProtocol(path, im.Volumes(), &im.Source, o)
	if err != nil {
		return nil, nil, err
	}
	im.Acq = acq
	return im, inputs, nil
}

// NIfTIProtocol assembles what Load adds to the samples of the NIfTI
// series at path with nt volumes, for a caller that reads the samples
// itself (in slabs): the acquisition parameters of each volume from the
// sidecar beside it, then o's lists; src (from the header) gets the
// path, format and the sidecar's description, field, scanner and date.
// It returns the parameters and the files read.
func NIfTIProtocol(path string, nt int, src *volume.Source, o *Overrides) ([]volume.Acquisition, []Input, error) {
	inputs := []Input{{Path: path, Role: "series"}}
	acq := make([]volume.Acquisition, nt)
	for i := range acq {
		acq[i] = volume.Unknown()
	}
	src.Path = path
	src.Format = "nifti"
	if src.Description == "" {
		src.Description = filepath.Base(path)
	}
	src.FieldStrength = math.NaN()
	from := ""
	if sc, ok := sidecar.ForImage(path); ok {
		from = "the sidecar " + filepath.Base(sc)
		s, err := sidecar.Read(sc)
		if err != nil {
			return nil, nil, err
		}
		if acq, err = s.Acquisitions(nt); err != nil {
			return nil, nil, err
		}
		s.ApplySource(src)
		inputs = append(inputs, Input{Path: sc, Role: "sidecar"})
	}
	if o != nil {
		if err := applyTo(acq, o, path, from); err != nil {
			return nil, nil, err
		}
	}
	return acq, inputs, nil
}

// loadDICOM scans a DICOM folder or file and loads one series.
func loadDICOM(path string, o *Overrides) (*volume.Image, []Input, error) {
	r, inputs, err := OpenDICOM(path, o)
	if err != nil {
		return nil, nil, err
	}
	im, err := r.Load()
	if err != nil {
		return nil, nil, err
	}
	return im, inputs, nil
}

// OpenDICOM scans a DICOM folder or file once and opens the series or
// protocol that Load would read (o.Series, or the one candidate; o.Needs
// chooses among several), for a caller that reads its samples itself (in
// slabs). The acquisition parameters are the headers' (o's lists are not
// applied). It returns the reader and the files it reads.
func OpenDICOM(path string, o *Overrides) (*dicom.Reader, []Input, error) {
	var opt dicom.ScanOptions
	if o != nil {
		opt.KeepIdentifiers = o.KeepIdentifiers
		opt.Derived = o.Derived
	}
	cat, err := dicom.Scan([]string{path}, &opt)
	if err != nil {
		return nil, nil, err
	}
	var s *dicom.Series
	var prot *dicom.Protocol
	needs := ""
	if o != nil {
		needs = o.Series
	}
	switch {
	case strings.Contains(needs, ","):
		if prot, err = cat.Join(strings.Split(needs, ",")); err != nil {
			if strings.HasPrefix(err.Error(), path) {
				return nil, nil, err // names the folder already
			}
			return nil, nil, fmt.Errorf("%s: %v", path, err)
		}
	case needs != "":
		if p, ok := cat.LookupProtocol(needs); ok {
			prot = p
		} else if s, err = cat.Lookup(needs); err != nil {
			return nil, nil, fmt.Errorf("%s: %v", path, err)
		}
	default:
		// Candidates: loadable series of at least two volumes (a lone image
		// split off a series is not a relaxation series) and loadable
		// protocols; with o.Needs, those that vary it when there are any.
		type cand struct {
			id, varying string
			s           *dicom.Series
			p           *dicom.Protocol
		}
		var ok []cand
		var broken *dicom.Series
		var brokenProt *dicom.Protocol
		for _, x := range cat.Series {
			switch {
			case x.Problem == "" && x.Volumes >= 2:
				ok = append(ok, cand{x.ID, x.Varying, x, nil})
			case x.Problem != "" && (broken == nil || x.Files > broken.Files):
				broken = x
			}
		}
		for _, p := range cat.Protocols {
			if p.Problem == "" {
				ok = append(ok, cand{p.ID, p.Varying, nil, p})
			} else if brokenProt == nil {
				brokenProt = p
			}
		}
		if o != nil && o.Needs != "" {
			var match []cand
			for _, c := range ok {
				if c.varying == o.Needs {
					match = append(match, c)
				}
			}
			if len(match) > 0 {
				ok = match
			} else if brokenProt != nil && brokenProt.Varying == o.Needs {
				return nil, nil, brokenProt.Err()
			}
		}
		switch {
		case len(ok) == 1:
			s, prot = ok[0].s, ok[0].p
		case len(ok) > 1:
			var ids []string
			for _, x := range ok {
				ids = append(ids, x.id)
			}
			return nil, nil, fmt.Errorf("%s: holds %d candidate series or protocols (%s); choose one with --series (see tauvox scan)", path, len(ok), strings.Join(ids, ", "))
		case brokenProt != nil:
			return nil, nil, brokenProt.Err()
		case broken != nil:
			also := ""
			for _, p := range cat.Problems {
				if !strings.Contains(p.String(), broken.Problem) && p.Path != path {
					also = " (also: " + p.String() + ")"
					break
				}
			}
			return nil, nil, fmt.Errorf("%s: series %s cannot be loaded: %s%s", path, broken.ID, broken.Problem, also)
		case len(cat.Series) > 0:
			return nil, nil, fmt.Errorf("%s: no series with more than one volume (series %s has %d)", path, cat.Series[0].ID, cat.Series[0].Volumes)
		case len(cat.Problems) > 0:
			return nil, nil, fmt.Errorf("%s: no readable DICOM series (%d problems; first: %s)", path, len(cat.Problems), cat.Problems[0].String())
		case cat.Ignored > 0:
			return nil, nil, fmt.Errorf("%s: no DICOM series found (%d localizer, derived or non-image objects left out; --derived reads derived images)", path, cat.Ignored)
		default:
			return nil, nil, fmt.Errorf("%s: no DICOM series found (%d other files skipped)", path, cat.Skipped)
		}
	}
	var r *dicom.Reader
	var paths []string
	if prot != nil {
		r, err = dicom.OpenProtocol(prot)
		paths = prot.Paths()
	} else {
		r, err = dicom.OpenSeries(s)
		paths = s.Paths()
	}
	if err != nil {
		return nil, nil, err
	}
	var inputs []Input
	for _, p := range paths {
		inputs = append(inputs, Input{Path: p, Role: "dicom"})
	}
	return r, inputs, nil
}

// Apply replaces the parameters o lists in acq (one value for every
// volume, or one per volume) of a DICOM series; path names the series in
// messages.
func Apply(acq []volume.Acquisition, o *Overrides, path string) error {
	return applyTo(acq, o, path, "the DICOM headers")
}

// applyTo replaces the parameters o lists: one value for every volume or
// one per volume. A list that replaces different values of from (the
// sidecar or the DICOM headers; "" when there is none) adds a notice to o.
func applyTo(acq []volume.Acquisition, o *Overrides, path, from string) error {
	nt := len(acq)
	set := func(flag, key, unit string, vals []float64, field func(a *volume.Acquisition) *float64) error {
		if vals == nil {
			return nil
		}
		if len(vals) != 1 && len(vals) != nt {
			return fmt.Errorf("%s: --%s lists %d values but the image has %d volumes", path, flag, len(vals), nt)
		}
		if err := CheckUnits(flag, vals); err != nil {
			return err
		}
		old := make([]float64, nt)
		differ := false
		for t := range acq {
			v := vals[0]
			if len(vals) == nt {
				v = vals[t]
			}
			p := field(&acq[t])
			old[t] = *p
			differ = differ || (!math.IsNaN(*p) && math.Abs(*p-v) > 1e-9*math.Max(1, math.Abs(v)))
			*p = v
		}
		if differ && from != "" {
			o.Notices = append(o.Notices, fmt.Sprintf("--%s %s%s replaces the %s of %s (%s%s)", flag, sidecar.FormatList(vals, 1), unit, key, from, sidecar.FormatList(old, 1), unit))
		}
		return nil
	}
	return errors.Join(
		set("te", "EchoTime", " ms", o.TE, func(a *volume.Acquisition) *float64 { return &a.EchoTime }),
		set("ti", "InversionTime", " ms", o.TI, func(a *volume.Acquisition) *float64 { return &a.InversionTime }),
		set("tr", "RepetitionTime", " ms", o.TR, func(a *volume.Acquisition) *float64 { return &a.RepetitionTime }),
		set("fa", "FlipAngle", "°", o.FA, func(a *volume.Acquisition) *float64 { return &a.FlipAngle }),
	)
}

// CheckUnits refuses a command-line list (--te, --ti, --tr in ms, --fa in
// degrees) whose values are impossible in that unit but plausible in
// another, saying what was probably meant (common practice):
//   - --te: every echo time below 0.5 ms (echo times written in seconds;
//     an ultrashort-echo series still has later echoes above 0.5 ms);
//   - --ti, --tr: a time above 0 and below 1 ms (shorter than any
//     inversion pulse or repetition; seconds);
//   - --fa: an angle above 180°, or angles that look like radians
//     (sidecar.LooksLikeRadians).
func CheckUnits(flag string, vals []float64) error {
	list := sidecar.FormatList(vals, 1)
	seconds := func(what, why string) error {
		return fmt.Errorf("--%s %s: tauvox takes %s in ms and %s, as times in seconds would be: was --%s %s (ms) meant?", flag, list, what, why, flag, sidecar.FormatList(vals, 1000))
	}
	switch flag {
	case "te":
		longest := math.Inf(-1)
		for _, v := range vals {
			longest = math.Max(longest, v)
		}
		if longest > 0 && longest < 0.5 {
			return seconds("echo times", "every value is below 0.5 ms")
		}
	case "ti", "tr":
		what := map[string]string{"ti": "inversion times", "tr": "repetition times"}[flag]
		pulse := map[string]string{"ti": "an inversion pulse", "tr": "an excitation"}[flag]
		for _, v := range vals {
			if v > 0 && v < 1 {
				return seconds(what, fmt.Sprintf("%g ms is shorter than %s lasts", v, pulse))
			}
		}
	case "fa":
		for _, v := range vals {
			if v > 180 {
				return fmt.Errorf("--fa %s: tauvox takes flip angles in degrees, and %g° is above 180°", list, v)
			}
		}
		if sidecar.LooksLikeRadians(vals) {
			return fmt.Errorf("--fa %s: tauvox takes flip angles in degrees and these look like radians: was --fa %s meant?", list, sidecar.FormatList(sidecar.Degrees(vals), 1))
		}
	}
	return nil
}

// SkipEchoes returns a copy of im without the n volumes of shortest echo
// time (for dropping the first echoes of a spin-echo train, whose
// stimulated-echo content differs from the rest). n = 0 returns im.
func SkipEchoes(im *volume.Image, n int) (*volume.Image, error) {
	if n == 0 {
		return im, nil
	}
	vols, acq, err := KeepVolumes(im.Acq, n)
	if err != nil {
		return nil, err
	}
	out := &volume.Image{Dims: im.Dims, Affine: im.Affine, Source: im.Source, Acq: acq}
	out.Dims[3] = len(vols)
	out.Data = make([]float32, 0, im.Voxels()*len(vols))
	for _, t := range vols {
		out.Data = append(out.Data, im.Volume(t)...)
	}
	return out, nil
}

// KeepVolumes returns the volumes that remain when the n of shortest echo
// time are left out (in volume order) and their protocol: the rule of
// SkipEchoes, for readers that fetch the volumes themselves.
func KeepVolumes(acq []volume.Acquisition, n int) ([]int, []volume.Acquisition, error) {
	nt := len(acq)
	if n < 0 || n >= nt {
		return nil, nil, fmt.Errorf("cannot skip %d of %d echoes", n, nt)
	}
	order := make([]int, nt)
	for i := range order {
		order[i] = i
		if math.IsNaN(acq[i].EchoTime) {
			return nil, nil, fmt.Errorf("cannot skip echoes: echo time of volume %d is unknown", i+1)
		}
	}
	sort.SliceStable(order, func(x, y int) bool { return acq[order[x]].EchoTime < acq[order[y]].EchoTime })
	drop := make([]bool, nt)
	for _, t := range order[:n] {
		drop[t] = true
	}
	var vols []int
	var kept []volume.Acquisition
	for t := range acq {
		if !drop[t] {
			vols = append(vols, t)
			kept = append(kept, acq[t])
		}
	}
	return vols, kept, nil
}

// SidecarName returns the sidecar path of a NIfTI path (x.nii.gz → x.json).
func SidecarName(niftiPath string) string {
	base := strings.TrimSuffix(strings.TrimSuffix(niftiPath, ".gz"), ".nii")
	return base + ".json"
}

// Write writes im as a NIfTI series (float32) and a BIDS-style sidecar
// giving the acquisition parameters in seconds (BIDS metadata: EchoTime,
// InversionTime and RepetitionTime in s; FlipAngle in degrees). Parameters
// that vary are written as lists, constant ones as numbers, unknown ones
// not at all. extra holds further sidecar keys.
func Write(path string, im *volume.Image, extra map[string]any) error {
	side := map[string]any{}
	for k, v := range extra {
		side[k] = v
	}
	for k, v := range sidecar.Keys(im.Acq, im.Source.FieldStrength) {
		side[k] = v
	}
	if im.Source.Scanner != "" {
		side["StationName"] = im.Source.Scanner
	}
	if im.Source.Description != "" {
		side["SeriesDescription"] = im.Source.Description
	}
	if err := nifti.Write(path, im, &nifti.WriteOptions{Description: im.Source.Description}); err != nil {
		return err
	}
	b, err := json.MarshalIndent(side, "", "  ")
	if err != nil {
		return err
	}
	return output.WriteFile(SidecarName(path), append(b, '\n'))
}
