package main

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/internal/qarun"
	"github.com/tauvox/tauvox/roi/phantom"
)

type phantomArgs struct {
	def, out, scanner, date, clock string
	face                           string
	temp, field, rotation, frac    float64
	center                         vecFlag
	centerSet, rotSet              bool
	mirrored, extrapolate, force   bool
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
abs_ms) of the definition's tolerance. The vials are told apart by their
values: every placement the layout's symmetry allows is measured and the
one matching the references best is taken when it wins by a clear margin;
otherwise every vial is undetermined (no pass or fail) and the reason is
printed. Exit code 1 when any vial fails or is undetermined.
--def demo uses the built-in definition of the invented demo phantom.`, e)
	fs.StringVar(&a.def, "def", "", "phantom definition (JSON, format tauvox-phantom/1) or \"demo\" (required)")
	fs.Var(optFloat{&a.temp, &tempSet}, "temperature", "phantom temperature, °C (required)")
	fs.StringVar(&a.out, "out", "", "output folder (required)")
	fs.BoolVar(&a.force, "force", false, "replace an existing output folder")
	fs.Var(optFloat{&a.field, &fieldSet}, "field", "field strength, T (default: from the maps' provenance)")
	fs.StringVar(&a.scanner, "scanner", "", "scanner name (default: from the headers)")
	fs.StringVar(&a.date, "date", "", "session date YYYY-MM-DD (default: acquisition date)")
	fs.StringVar(&a.clock, "time", "", "session time HH:MM (default: acquisition time)")
	fs.Var(setVec{&a.center, &a.centerSet}, "center", "phantom centre x,y,z in scanner RAS mm (default: found)")
	fs.Var(optFloat{&a.rotation, &a.rotSet}, "rotation", "phantom rotation in the slice plane, degrees (default: found)")
	fs.StringVar(&a.face, "face", "", "up or down: the phantom's face (default: found)")
	fs.BoolVar(&a.mirrored, "mirrored", false, "the phantom lies face down (the same as --face down)")
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
	case a.face != "" && a.face != "up" && a.face != "down":
		return fmt.Errorf("--face %q: want up or down", a.face)
	case a.mirrored && a.face == "up":
		return errors.New("--mirrored contradicts --face up")
	}
	if a.mirrored {
		a.face = "down"
	}
	if !fieldSet {
		a.field = math.NaN()
	}
	if err := checkOutput(a.out, append([]string{a.def}, pos...)...); err != nil {
		return err
	}
	c := &qarun.Config{Def: a.def, Maps: pos, Options: phantom.Options{
		Session:     phantom.Session{Scanner: a.scanner, Date: a.date, Time: a.clock, Field: a.field, Temperature: a.temp},
		Extrapolate: a.extrapolate, ROIFraction: a.frac, Tool: phantom.Tool{Name: "tauvox", Version: version()}}}
	if a.centerSet {
		c.Options.Locate.Center = &a.center.v
	}
	if a.rotSet {
		c.Options.Locate.Rotation = &a.rotation
	}
	if a.face != "" {
		m := a.face == "down"
		c.Options.Locate.Mirrored = &m
	}
	s, err := qarun.Assess(c)
	if err != nil {
		return err
	}
	st, err := newStage(e, a.out, a.force)
	if err != nil {
		return err
	}
	defer st.Abort()
	var hist map[string]string
	if a.history != "" {
		db, err := openDB(a.history, true)
		if err != nil {
			return err
		}
		hist, err = s.HistoryFlags(ctx, db, false)
		db.Close()
		if err != nil {
			return err
		}
	}
	if err := s.Write(st.Path(""), hist); err != nil {
		return err
	}
	if err := st.Commit(); err != nil {
		return err
	}
	if !a.quiet {
		printQA(e, s.QA, a.out)
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
	s := qa.Session
	fmt.Fprintf(e.stdout, "%s, %s %s, %g T, %g °C: %s\n", s.Phantom, s.Scanner, strings.TrimSpace(s.Date+" "+s.Time), s.Field, s.Temperature, strings.ToUpper(qa.Verdict))
	for _, sr := range qa.Series {
		l := sr.Localisation
		fmt.Fprintf(e.stdout, "  %s: phantom at (%.1f, %.1f, %.1f) mm, turned %.1f°, face %s, slice %d, geometric residual %s mm\n",
			sr.Quantity, l.Center[0], l.Center[1], l.Center[2], l.Rotation, map[bool]string{true: "down", false: "up"}[l.Mirrored], l.Slice, fmtNum(l.Residual, 2))
	}
	if id := qa.Identity; id != nil {
		for _, g := range id.Groups {
			line := fmt.Sprintf("  identity (%s): %s", strings.Join(g.Quantities, "+"), g.Status)
			if g.Z != nil {
				line += fmt.Sprintf(", %d placements measured, margin over the next %.1f × its noise spread (threshold %g)", g.Placements, *g.Z, id.Threshold)
			}
			if g.Reason != "" {
				line += "; " + g.Reason
			}
			fmt.Fprintln(e.stdout, line)
		}
	}
	fmt.Fprintf(e.stdout, "  %-5s %-3s %9s %9s %8s %6s  %s\n", "vial", "q", "median", "ref", "dev %", "tol", "verdict")
	for _, v := range qa.Vials {
		fmt.Fprintf(e.stdout, "  %-5s %-3s %9s %9s %8s %6s  %s\n", v.ID, v.Quantity, fmtNum(v.Median, 1), fmtNum(v.Reference, 1),
			fmtNum(v.Deviation, 2), fmtNum(v.Tolerance, 1), v.Verdict)
	}
	fmt.Fprintf(e.stdout, "wrote %s (qa.json, qa.csv, report.html)\n", out)
}
