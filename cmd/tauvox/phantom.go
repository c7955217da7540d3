package main

import (
	"context"
	"errors"
	"fmt"
	"math"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/internal/qarun"
	"github.com/tauvox/tauvox/roi/phantom"
)

// finite is a float flag that refuses NaN and infinities.
type finite struct{ v *float64 }

func (o finite) String() string { return "" }
func (o finite) Set(s string) error {
	var v float64
	if _, err := fmt.Sscanf(s, "%g", &v); err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Errorf("want a number")
	}
	*o.v = v
	return nil
}

func runPhantom(ctx context.Context, args []string, e *env) error {
	var (
		out, face, history     string
		force, mirrored, quiet bool
	)
	// A NaN temperature is not given; a NaN field comes from the maps.
	c := &qarun.Config{Options: phantom.Options{Tool: phantom.Tool{Name: "tauvox", Version: version()},
		Session: phantom.Session{Temperature: math.NaN(), Field: math.NaN()}}}
	o := &c.Options
	fs := newFlags("phantom", "MAPS... --def FILE --temperature C --out DIR [options]",
		`Locates the phantom's vials in each map (T1map, T2map of fit output folders or
map files; the M0map beside a map is used to find the vials), measures each
vial (median, mean, SD over a cylinder of --roi-fraction of its radius through
the phantom's interior slices), compares it with the reference interpolated
to the session's temperature and field, and writes qa.json, qa.csv and
report.html into DIR. A vial passes when |median − reference| ≤ max(pct %,
abs_ms) of the definition's tolerance. The vials are told apart by their
values: every placement the layout's symmetry allows is measured and the
one matching the references best is taken when it wins by a clear margin;
otherwise every vial is undetermined (no pass or fail) and the reason is
printed. Exit code 1 when any vial fails or is undetermined.
--def demo uses the built-in definition of the invented demo phantom.`, e)
	fs.StringVar(&c.Def, "def", "", "phantom definition (JSON, format tauvox-phantom/1) or \"demo\" (required)")
	fs.Var(finite{&o.Session.Temperature}, "temperature", "phantom temperature, °C (required)")
	fs.StringVar(&out, "out", "", "output folder (required)")
	fs.BoolVar(&force, "force", false, "replace an existing output folder")
	fs.Var(finite{&o.Session.Field}, "field", "field strength, T (default: from the maps' provenance)")
	fs.StringVar(&o.Session.Scanner, "scanner", "", "scanner name (default: from the headers)")
	fs.StringVar(&o.Session.Date, "date", "", "session date YYYY-MM-DD (default: acquisition date)")
	fs.StringVar(&o.Session.Time, "time", "", "session time HH:MM (default: acquisition time)")
	fs.Func("center", "phantom centre x,y,z in scanner RAS mm (default: found)", func(s string) error {
		var v vecFlag
		o.Locate.Center = &v.v
		return v.Set(s)
	})
	fs.Func("rotation", "phantom rotation in the slice plane, degrees (default: found)", func(s string) error {
		o.Locate.Rotation = new(float64)
		return finite{o.Locate.Rotation}.Set(s)
	})
	fs.StringVar(&face, "face", "", "up or down: the phantom's face (default: found)")
	fs.BoolVar(&mirrored, "mirrored", false, "the phantom lies face down (the same as --face down)")
	fs.BoolVar(&o.Extrapolate, "extrapolate", false, "allow a temperature outside the reference tables")
	fs.Float64Var(&o.ROIFraction, "roi-fraction", phantom.DefaultROIFraction, "measurement radius as a fraction of the vial radius")
	fs.BoolVar(&quiet, "quiet", false, "print nothing on success")
	fs.StringVar(&history, "history", "", "history database (read only): a passing vial its history flags is shown as warn")
	if err := parse(fs, args, &c.Maps); err != nil {
		return err
	}
	switch {
	case len(c.Maps) == 0:
		return errors.New("give at least one fit output folder or map (see --help)")
	case c.Def == "":
		return errors.New("--def is required (a definition file, or demo)")
	case math.IsNaN(o.Session.Temperature):
		return errors.New("--temperature is required (°C)")
	case out == "":
		return errors.New("--out is required")
	case !(o.ROIFraction > 0 && o.ROIFraction <= 1):
		return errors.New("--roi-fraction must be in (0, 1]")
	case face != "" && face != "up" && face != "down":
		return fmt.Errorf("--face %q: want up or down", face)
	case mirrored && face == "up":
		return errors.New("--mirrored contradicts --face up")
	}
	if face != "" || mirrored {
		m := face == "down" || mirrored
		o.Locate.Mirrored = &m
	}
	if err := checkOutput(out, append([]string{c.Def}, c.Maps...)...); err != nil {
		return err
	}
	s, err := qarun.Assess(c)
	if err != nil {
		return err
	}
	st, err := newStage(e, out, force)
	if err != nil {
		return err
	}
	defer st.Abort()
	hist, err := s.HistoryFrom(ctx, history)
	if err != nil {
		return err
	}
	if err := s.Write(st.Path(""), hist); err != nil {
		return err
	}
	if err := st.Commit(); err != nil {
		return err
	}
	if !quiet {
		printQA(e, s.QA, out)
	}
	qa := s.QA
	undetermined := qa.Identity != nil && qa.Identity.Status == phantom.IdentityUndetermined
	if undetermined {
		fmt.Fprintf(e.stderr, "tauvox phantom: identity undetermined: %s; to fix: %s\n", qa.Identity.Reason, qa.Identity.Fix)
	}
	if qa.Verdict == phantom.Fail || qa.Verdict == phantom.Undetermined || undetermined {
		return &exitError{code: 1}
	}
	return nil
}

// fmtNum formats a table cell (output.Num).
func fmtNum(v float64, prec int) string { return output.Num(v, prec) }

func printQA(e *env, qa *phantom.QA, out string) {
	qarun.Summary(e.stdout, qa)
	fmt.Fprintf(e.stdout, "wrote %s (qa.json, qa.csv, report.html)\n", out)
}
