package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"path/filepath"
	"time"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/internal/report"
	"github.com/tauvox/tauvox/io/sidecar"
	"github.com/tauvox/tauvox/roi/history"
	"github.com/tauvox/tauvox/roi/phantom"
)

// demoDrift is the invented yearly drift of vial A7's material in the demo.
const demoDrift = -0.05

func runDemo(ctx context.Context, args []string, e *env) error {
	var out string
	var force forceFlag
	var sessions int
	fs := newFlags("demo", "[--out DIR] [--sessions N]",
		`Runs the whole chain on built-in synthetic data. For each of N monthly QA
sessions of an invented scanner it simulates a multi-echo spin-echo and an
inversion-recovery series of the invented demo phantom (1.5 T, the phantom
placed a little differently and at a different temperature each time, vial A7
slowly drifting), fits T2 and T1, runs the phantom QA, records the session in
a history database, and finally charts the history. Prints the last session's
verdict table and the drift table.`, e)
	fs.StringVar(&out, "out", "tauvox-demo", "folder for the demo's files")
	fs.Var(&force, "force", forceUsage)
	fs.IntVar(&sessions, "sessions", 12, "number of monthly sessions (3…36)")
	if err := parse(fs, args, nil); err != nil {
		return err
	}
	if sessions < 3 || sessions > 36 {
		return fmt.Errorf("--sessions must be 3…36")
	}
	st, err := newStage(e, out, force)
	if err != nil {
		return err
	}
	defer st.Abort()
	quiet := &env{stdout: io.Discard, stderr: e.stderr, terminal: false}
	db, err := history.Open(st.Path("history.db"), nil)
	if err != nil {
		return err
	}
	defer db.Close()
	rng := rand.New(rand.NewPCG(2026, 12))
	start := time.Date(2026, 1, 12, 8, 30, 0, 0, time.UTC)
	var last *phantom.QA
	index := &report.DemoIndex{Scanner: "HARBOUR-MR2", Phantom: phantom.Demo().Name, History: "history/index.html"}
	for n := 0; n < sessions; n++ {
		when := start.AddDate(0, n, rng.IntN(7)-3)
		years := when.Sub(start).Hours() / 24 / 365.2425
		temp := math.Round((21+1.5*math.Sin(float64(n)*1.3)+0.3*rng.NormFloat64())*10) / 10
		sim := simArgs{field: 1.5, temp: temp, sigma: 10, rotation: math.Round(rng.Float64()*360*10) / 10, b1: 1, ineff: 1,
			seed: uint64(100 + n), matrix: 96, slices: 3, scanner: "HARBOUR-MR2", date: when.Format("2006-01-02"), clock: when.Format("15:04"),
			center: vecFlag{[3]float64{math.Round(rng.NormFloat64()*80) / 10, math.Round(rng.NormFloat64()*80) / 10, 0}},
			drift:  driftFlag{"A7": 1 + demoDrift*years}}
		dir := "session-" + when.Format("2006-01-02")
		var fits []string
		for _, j := range []struct{ kind, model, noise string }{{"t2", "t2", "rician"}, {"t1-ir", "t1-ir", "gaussian"}} {
			sim.kind = j.kind
			sub := st.Path(filepath.Join(dir, j.kind))
			if err := mkdirAll(sub); err != nil {
				return err
			}
			s, err := sim.simulation()
			if err != nil {
				return err
			}
			if _, err := pipeline.Simulate(sub, s); err != nil {
				return err
			}
			fitDir := st.Path(filepath.Join(dir, "fit-"+j.kind))
			c := &pipeline.Config{Series: filepath.Join(sub, j.kind+".nii.gz"), Out: fitDir, Spec: fit.Spec{Model: j.model}, Rician: j.noise == "rician"}
			if err := fitSeries(ctx, c, true, quiet); err != nil {
				return err
			}
			fits = append(fits, fitDir)
		}
		pa := &phantomArgs{def: "demo", temp: temp, field: math.NaN(), frac: phantom.DefaultROIFraction}
		qa, res, inputs, def, err := assessPhantom(pa, fits)
		if err != nil {
			return err
		}
		qaDir := st.Path(filepath.Join(dir, "qa"))
		if err := mkdirAll(qaDir); err != nil {
			return err
		}
		b, err := json.MarshalIndent(qa, "", "  ")
		if err != nil {
			return fmt.Errorf("%s: qa.json: %v", qaDir, err)
		}
		b = append(sidecar.Tidy(b), '\n')
		if err := output.WriteFile(filepath.Join(qaDir, "qa.json"), b); err != nil {
			return err
		}
		if err := output.WriteFile(filepath.Join(qaDir, "qa.csv"), qaCSV(qa)); err != nil {
			return err
		}
		if _, err := db.Add(ctx, b, filepath.Join(dir, "qa", "qa.json")); err != nil {
			return err
		}
		// The report shows a passing vial that its history so far flags
		// as warn.
		pts, err := db.Points(ctx, qa.Session.Scanner)
		if err != nil {
			return err
		}
		hist := report.HistoryFlags(history.Analyse(pts, nil))
		if err := writeReport(filepath.Join(qaDir, "report.html"), qa, res, inputs, def.Tolerance, hist); err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "session %2d  %s  %4.1f °C  phantom at (%5.1f, %5.1f) mm, %5.1f°: %s\n", n+1, when.Format("2006-01-02"), temp,
			qa.Series[0].Localisation.Center[0], qa.Series[0].Localisation.Center[1], qa.Series[0].Localisation.Rotation, qa.Verdict)
		failed := 0
		for _, v := range qa.Vials {
			if v.Verdict == phantom.Fail {
				failed++
			}
		}
		index.Sessions = append(index.Sessions, report.DemoSession{Date: qa.Session.Date, Time: qa.Session.Time,
			Temperature: temp, Verdict: qa.Verdict, Failed: failed, Report: dir + "/qa/report.html"})
		last = qa
	}
	db.Close()
	a := &chartArgs{db: st.Path("history.db"), out: st.Path("history"), baseline: history.DefaultBaseline, minDrift: 1,
		minLimit: history.DefaultMinLimit, minSessions: history.DefaultMinSessions, horizon: 12}
	ss, err := analyseHistory(ctx, a)
	if err != nil {
		return err
	}
	sum, err := writeCharts(a.out, ss, a.settings(), "history.db")
	if err != nil {
		return err
	}
	index.Summary = report.HistoryHeadline(sum)
	for _, s := range ss {
		if s.Drifting {
			index.Drifting = append(index.Drifting, s.Vial+" "+s.Quantity)
		}
	}
	if err := report.WriteDemoIndex(st.Path("index.html"), index); err != nil {
		return err
	}
	if err := st.Commit(); err != nil {
		return err
	}
	fmt.Fprintln(e.stdout)
	printQA(e, last, filepath.Join(out, "session-"+last.Session.Date, "qa"))
	fmt.Fprintf(e.stdout, "\nstability over %d sessions (baseline: first %d; deviation from the temperature-corrected reference, %%):\n", sessions, a.baseline)
	driftTable(e, ss)
	fmt.Fprintln(e.stdout, index.Summary)
	if sum.Actions+sum.Watches > 0 {
		fmt.Fprintln(e.stdout, "see", filepath.Join(out, "history", "index.html"))
	}
	fmt.Fprintln(e.stdout, "\nevery report and the charts:", filepath.Join(out, "index.html"))
	fmt.Fprintln(e.stdout, "\n"+output.Caution)
	return nil
}
