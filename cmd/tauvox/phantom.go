package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"time"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/internal/report"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/io/sidecar"
	"github.com/tauvox/tauvox/roi/history"
	"github.com/tauvox/tauvox/roi/phantom"
	"github.com/tauvox/tauvox/volume"
)

type phantomArgs struct {
	def, out, scanner, date, clock string
	temp, field, rotation, frac    float64
	center                         vecFlag
	centerSet, rotSet              bool
	mirrored, extrapolate          bool
	force                          forceFlag
	quiet                          bool
	history                        string
}

// optFloat records whether a float flag was set.
type optFloat struct {
	v   *float64
	set *bool
}

func (o optFloat) String() string { return "" }
func (o optFloat) Set(s string) error {
	var v float64
	if _, err := fmt.Sscanf(s, "%g", &v); err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Errorf("want a number")
	}
	*o.v, *o.set = v, true
	return nil
}

type setVec struct {
	v   *vecFlag
	set *bool
}

func (o setVec) String() string { return "" }
func (o setVec) Set(s string) error {
	if err := o.v.Set(s); err != nil {
		return err
	}
	*o.set = true
	return nil
}

func runPhantom(ctx context.Context, args []string, e *env) error {
	var a phantomArgs
	a.temp = math.NaN()
	var tempSet, fieldSet bool
	fs := newFlags("phantom", "MAPS... --def FILE --temperature C --out DIR [options]",
		`Locates the phantom's vials in each map (T1map, T2map of fit output folders or
map files; the M0map beside a map is used to find the vials), measures each
vial (median, mean, SD over a cylinder of --roi-fraction of its radius through
the phantom's interior slices), compares it with the reference interpolated
to the session's temperature and field, and writes qa.json, qa.csv and
report.html into DIR. A vial passes when |median − reference| ≤ max(pct %,
abs_ms) of the definition's tolerance. Exit code 1 when any vial fails.
--def demo uses the built-in definition of the invented demo phantom.`, e)
	fs.StringVar(&a.def, "def", "", "phantom definition (JSON, format tauvox-phantom/1) or \"demo\" (required)")
	fs.Var(optFloat{&a.temp, &tempSet}, "temperature", "phantom temperature, °C (required)")
	fs.StringVar(&a.out, "out", "", "output folder (required)")
	fs.Var(&a.force, "force", forceUsage)
	fs.Var(optFloat{&a.field, &fieldSet}, "field", "field strength, T (default: from the maps' provenance)")
	fs.StringVar(&a.scanner, "scanner", "", "scanner name (default: from the headers)")
	fs.StringVar(&a.date, "date", "", "session date YYYY-MM-DD (default: acquisition date)")
	fs.StringVar(&a.clock, "time", "", "session time HH:MM (default: acquisition time)")
	fs.Var(setVec{&a.center, &a.centerSet}, "center", "phantom centre x,y,z in scanner RAS mm (default: found)")
	fs.Var(optFloat{&a.rotation, &a.rotSet}, "rotation", "phantom rotation in the slice plane, degrees (default: found)")
	fs.BoolVar(&a.mirrored, "mirrored", false, "with --rotation: the phantom lies face down")
	fs.BoolVar(&a.extrapolate, "extrapolate", false, "allow a temperature outside the reference tables")
	fs.Float64Var(&a.frac, "roi-fraction", phantom.DefaultROIFraction, "measurement radius as a fraction of the vial radius")
	fs.BoolVar(&a.quiet, "quiet", false, "print nothing on success")
	fs.StringVar(&a.history, "history", "", "history database (read only): a passing vial its history flags is shown as warn")
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
		return err
	}
	switch {
	case len(pos) == 0:
		return errors.New("give at least one fit output folder or map (see --help)")
	case a.def == "":
		return errors.New("--def is required (a definition file, or demo)")
	case !tempSet:
		return errors.New("--temperature is required (°C)")
	case a.out == "":
		return errors.New("--out is required")
	case !(a.frac > 0 && a.frac <= 1):
		return errors.New("--roi-fraction must be in (0, 1]")
	}
	if !fieldSet {
		a.field = math.NaN()
	}
	if err := checkOutput(a.out, append([]string{a.def}, pos...)...); err != nil {
		return err
	}
	qa, res, inputs, def, err := assessPhantom(&a, pos)
	if err != nil {
		return err
	}
	st, err := newStage(e, a.out, a.force)
	if err != nil {
		return err
	}
	defer st.Abort()
	b, err := json.MarshalIndent(qa, "", "  ")
	if err != nil {
		return fmt.Errorf("%s: qa.json: %v", a.out, err)
	}
	if err := series.WriteFileAtomic(st.Path("qa.json"), append(sidecar.Tidy(b), '\n')); err != nil {
		return err
	}
	if err := series.WriteFileAtomic(st.Path("qa.csv"), qaCSV(qa)); err != nil {
		return err
	}
	var hist map[string]string
	if a.history != "" {
		db, err := openDB(a.history, true)
		if err != nil {
			return err
		}
		pts, err := db.Points(ctx, qa.Session.Scanner)
		db.Close()
		if err != nil {
			return err
		}
		hist = report.HistoryFlags(history.Analyse(history.WithSession(pts, qa), nil))
	}
	if err := writeReport(st.Path("report.html"), qa, res, inputs, def.Tolerance, hist); err != nil {
		return err
	}
	if err := st.Commit(); err != nil {
		return err
	}
	if !a.quiet {
		printQA(e, qa, a.out)
	}
	if qa.Verdict == phantom.Fail {
		return &exitError{code: 1}
	}
	return nil
}

var (
	dateRE  = regexp.MustCompile(`^\d{4}-\d{2}-\d{2}$`)
	clockRE = regexp.MustCompile(`^\d{2}:\d{2}$`)
)

// assessPhantom reads the maps and runs the assessment.
func assessPhantom(a *phantomArgs, paths []string) (*phantom.QA, *phantom.Result, []phantom.Input, *phantom.Definition, error) {
	var def *phantom.Definition
	if a.def == "demo" {
		def = phantom.Demo()
	} else {
		var err error
		if def, err = phantom.Read(a.def); err != nil {
			return nil, nil, nil, nil, err
		}
	}
	var inputs []phantom.Input
	sess := phantom.Session{Scanner: a.scanner, Date: a.date, Time: a.clock, Field: a.field, Temperature: a.temp}
	for _, p := range paths {
		ins, prov, err := phantomInputs(p)
		if err != nil {
			return nil, nil, nil, nil, err
		}
		if prov != nil {
			if sess.Scanner == "" {
				sess.Scanner = prov.Scanner
			}
			if t, ok := parseAcquired(prov.Acquired); ok {
				if sess.Date == "" {
					sess.Date = t.Format("2006-01-02")
				}
				if sess.Time == "" {
					sess.Time = t.Format("15:04")
				}
			}
			if math.IsNaN(sess.Field) && prov.Field != nil {
				sess.Field = *prov.Field
			}
		}
		inputs = append(inputs, ins...)
	}
	if len(inputs) == 0 {
		return nil, nil, nil, nil, fmt.Errorf("%s: no T1map or T2map found", strings.Join(paths, ", "))
	}
	switch {
	case sess.Date == "":
		return nil, nil, nil, nil, fmt.Errorf("session date unknown: %s records no acquisition date (the series' sidecar has no AcquisitionDateTime, the DICOM no AcquisitionDate); give --date YYYY-MM-DD", strings.Join(paths, ", "))
	case !dateRE.MatchString(sess.Date):
		return nil, nil, nil, nil, fmt.Errorf("--date %q: want YYYY-MM-DD", sess.Date)
	case sess.Time != "" && !clockRE.MatchString(sess.Time):
		return nil, nil, nil, nil, fmt.Errorf("--time %q: want HH:MM", sess.Time)
	case math.IsNaN(sess.Field):
		return nil, nil, nil, nil, errors.New("field strength unknown: give --field")
	}
	if _, err := time.Parse("2006-01-02", sess.Date); err != nil {
		return nil, nil, nil, nil, fmt.Errorf("--date %q is not a calendar date", sess.Date)
	}
	if sess.Scanner == "" {
		sess.Scanner = "unknown"
	}
	opt := &phantom.Options{Session: sess, Extrapolate: a.extrapolate, ROIFraction: a.frac,
		Tool: phantom.Tool{Name: "tauvox", Version: version()}, Caution: output.Caution}
	if a.centerSet {
		c := a.center.v
		opt.Locate.Center = &c
	}
	if a.rotSet {
		r, m := a.rotation, a.mirrored
		opt.Locate.Rotation, opt.Locate.Mirrored = &r, &m
	}
	res, err := phantom.Assess(def, inputs, opt)
	if err != nil {
		return nil, nil, nil, nil, err
	}
	return res.QA, res, inputs, def, nil
}

// phantomInputs reads the T1/T2 maps (with their status and M0 map) of a
// fit output folder or a single map file.
func phantomInputs(p string) ([]phantom.Input, *mapset.Provenance, error) {
	st, err := os.Stat(p)
	if err != nil {
		return nil, nil, err
	}
	var folder *mapset.Folder
	var only string
	if st.IsDir() {
		if folder, err = mapset.Open(p); err != nil {
			return nil, nil, err
		}
	} else {
		base := filepath.Base(p)
		for _, q := range []string{"T1", "T2"} {
			if strings.HasPrefix(base, q+"map.nii") {
				only = q
			}
		}
		if only == "" {
			return nil, nil, fmt.Errorf("%s: not a T1map or T2map file", p)
		}
		if folder, err = mapset.Open(filepath.Dir(p)); err != nil {
			return nil, nil, err
		}
		folder.Maps[only+"map"] = p
	}
	var out []phantom.Input
	for _, q := range []string{"T1", "T2"} {
		path, ok := folder.Maps[q+"map"]
		if !ok || (only != "" && q != only) {
			continue
		}
		m, err := nifti.Read(path)
		if err != nil {
			return nil, nil, err
		}
		if m.Volumes() != 1 {
			return nil, nil, fmt.Errorf("%s: a map must hold one volume, not %d", path, m.Volumes())
		}
		in := phantom.Input{Quantity: q, Map: m, Ref: phantom.SeriesRef{Map: mapset.FinalPath(path)}}
		if sp, ok := folder.Maps["status"]; ok {
			s, err := nifti.Read(sp)
			if err != nil {
				return nil, nil, err
			}
			if !volume.SameGrid(s, m, 1e-3) {
				return nil, nil, fmt.Errorf("%s: status map and %s lie on different grids", sp, path)
			}
			in.Status = make([]uint8, len(s.Data))
			for i, v := range s.Data {
				in.Status[i] = uint8(v)
			}
		}
		if mp, ok := folder.Maps["M0map"]; ok {
			l, err := nifti.Read(mp)
			if err != nil {
				return nil, nil, err
			}
			if !volume.SameGrid(l, m, 1e-3) {
				return nil, nil, fmt.Errorf("%s: M0 map and %s lie on different grids", mp, path)
			}
			in.Locator = l
		}
		if pr := folder.Provenance; pr != nil {
			in.Ref.Model, in.Ref.Method = pr.Model, pr.Method
			in.Ref.Description = pr.Series
			for _, pp := range pr.Protocol {
				in.Ref.Protocol = append(in.Ref.Protocol, phantom.Protocol{TE: pp.TE, TI: pp.TI, TR: pp.TR, FA: pp.FA})
			}
			for _, ip := range pr.Inputs {
				in.Ref.Inputs = append(in.Ref.Inputs, phantom.FileRef{Path: ip.Path, Role: ip.Role, SHA256: ip.SHA256})
			}
		}
		out = append(out, in)
	}
	return out, folder.Provenance, nil
}

// parseAcquired reads an acquisition date-time as sidecars and DICOM
// readers give it (RFC 3339, or without a zone, with optional fractions).
func parseAcquired(s string) (time.Time, bool) {
	for _, layout := range []string{time.RFC3339Nano, "2006-01-02T15:04:05.999999999", "2006-01-02T15:04:05", "2006-01-02T15:04", "2006-01-02"} {
		if t, err := time.Parse(layout, s); err == nil {
			return t, true
		}
	}
	return time.Time{}, false
}

func fmtNum(v float64, prec int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return fmt.Sprintf("%.*f", prec, v)
}

// qaCSV renders the per-vial results; times in ms.
func qaCSV(qa *phantom.QA) []byte {
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	w.Write([]string{"vial", "quantity", "n", "mean_ms", "median_ms", "sd_ms", "failed_fraction", "reference_ms",
		"reference_uncertainty_pct", "deviation_pct", "tolerance_ms", "verdict", "note"})
	for _, v := range qa.Vials {
		ref, dev, tol := "", "", ""
		if v.Reference > 0 {
			ref, tol = fmtNum(v.Reference, 2), fmtNum(v.Tolerance, 2)
			if v.Verdict != phantom.NotMeasured {
				dev = fmtNum(v.Deviation, 2)
			}
		}
		w.Write([]string{v.ID, v.Quantity, fmt.Sprint(v.N), fmtNum(v.Mean, 2), fmtNum(v.Median, 2), fmtNum(v.SD, 2),
			fmtNum(v.Failed, 3), ref, fmtNum(v.RefUncPct, 2), dev, tol, v.Verdict, v.Note})
	}
	w.Flush()
	return b.Bytes()
}

func printQA(e *env, qa *phantom.QA, out string) {
	s := qa.Session
	fmt.Fprintf(e.stdout, "%s, %s %s, %g T, %g °C: %s\n", s.Phantom, s.Scanner, strings.TrimSpace(s.Date+" "+s.Time), s.Field, s.Temperature, strings.ToUpper(qa.Verdict))
	for _, sr := range qa.Series {
		l := sr.Localisation
		fmt.Fprintf(e.stdout, "  %s: phantom at (%.1f, %.1f, %.1f) mm, turned %.1f°%s, slice %d, confidence %.2f\n",
			sr.Quantity, l.Center[0], l.Center[1], l.Center[2], l.Rotation, map[bool]string{true: ", face down"}[l.Mirrored], l.Slice, l.Confidence)
	}
	fmt.Fprintf(e.stdout, "  %-5s %-3s %9s %9s %8s %6s  %s\n", "vial", "q", "median", "ref", "dev %", "tol", "verdict")
	for _, v := range qa.Vials {
		fmt.Fprintf(e.stdout, "  %-5s %-3s %9s %9s %8s %6s  %s\n", v.ID, v.Quantity, fmtNum(v.Median, 1), fmtNum(v.Reference, 1),
			fmtNum(v.Deviation, 2), fmtNum(v.Tolerance, 1), v.Verdict)
	}
	fmt.Fprintf(e.stdout, "wrote %s (qa.json, qa.csv, report.html)\n", out)
}
