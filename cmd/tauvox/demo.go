package main

import (
	"context"
	"fmt"
	"path/filepath"
	"time"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/internal/qarun"
	"github.com/tauvox/tauvox/roi/phantom"
)

func runDemo(ctx context.Context, args []string, e *env) error {
	var out string
	var force bool
	d := &qarun.Demo{Version: version()}
	fs := newFlags("demo", "[--out DIR] [--sessions N]",
		`Runs the whole chain on built-in synthetic data. For each of N monthly QA
sessions of an invented scanner it simulates a multi-echo spin-echo and an
inversion-recovery series of the invented demo phantom (1.5 T, the phantom
placed a little differently and at a different temperature each time, vial A7
slowly drifting), fits T2 and T1, runs the phantom QA, records the session in
a history database, and finally charts the history. Prints the last session's
verdict table and the drift table.`, e)
	fs.StringVar(&out, "out", "tauvox-demo", "folder for the demo's files")
	fs.BoolVar(&force, "force", false, "replace an existing demo folder")
	fs.IntVar(&d.Sessions, "sessions", 12, "number of monthly sessions (3…36)")
	if err := parse(fs, args, nil); err != nil {
		return err
	}
	if d.Sessions < 3 || d.Sessions > 36 {
		return fmt.Errorf("--sessions must be 3…36")
	}
	st, err := newStage(e, out, force)
	if err != nil {
		return err
	}
	defer st.Abort()
	d.Dir, d.Done = st.Path(""), func(n int, when time.Time, temp float64, qa *phantom.QA) {
		l := qa.Series[0].Localisation
		fmt.Fprintf(e.stdout, "session %2d  %s  %4.1f °C  phantom at (%5.1f, %5.1f) mm, %5.1f°: %s\n", n+1, when.Format("2006-01-02"), temp,
			l.Center[0], l.Center[1], l.Rotation, qa.Verdict)
	}
	r, err := d.Run(ctx)
	if err != nil {
		return err
	}
	if err := st.Commit(); err != nil {
		return err
	}
	fmt.Fprintln(e.stdout)
	printQA(e, r.Last, filepath.Join(out, "session-"+r.Last.Session.Date, "qa"))
	fmt.Fprintf(e.stdout, "\nstability over %d sessions (baseline: first %d; deviation from the temperature-corrected reference, %%):\n", d.Sessions, r.Settings.Baseline.N)
	driftTable(e, r.Series)
	fmt.Fprintln(e.stdout, r.Index.Summary)
	if r.Summary.Actions+r.Summary.Watches > 0 {
		fmt.Fprintln(e.stdout, "see", filepath.Join(out, "history", "index.html"))
	}
	fmt.Fprintln(e.stdout, "\nevery report and the charts:", filepath.Join(out, "index.html"))
	fmt.Fprintln(e.stdout, "\n"+output.Caution)
	return nil
}
