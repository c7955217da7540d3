package qarun

import (
	"context"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"time"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/internal/report"
	"github.com/tauvox/tauvox/roi/history"
	"github.com/tauvox/tauvox/roi/phantom"
)

// demoDrift is the invented yearly drift of vial A7's material in the demo.
const demoDrift = -0.05

// demoScanner is the invented scanner of the demo's sessions.
const demoScanner = "HARBOUR-MR2"

// Demo is a run of the built-in scenario.
type Demo struct {
	// Dir is the existing, empty folder the demo writes into.
	Dir string
	// Sessions is the number of monthly sessions.
	Sessions int
	// Version is the tool version recorded in provenance and reports.
	Version string
	// Done, when not nil, is called after each session (n from 0) with
	// its date, phantom temperature and QA result.
	Done func(n int, when time.Time, temp float64, qa *phantom.QA)
}

// DemoResult is what the demo found.
type DemoResult struct {
	Last     *phantom.QA       // the last session's QA
	Settings *history.Settings // the history settings of the charts
	Series   []*history.Series // the stability history per vial and quantity
	Summary  *report.HistorySummary
	Index    *report.DemoIndex // the front page written to Dir/index.html
}

// Run runs the demo. For each session of an invented scanner it
// simulates a multi-echo spin-echo and an inversion-recovery series of the
// demo phantom (1.5 T, placed a little differently and at a different
// temperature each time, vial A7 slowly drifting), fits T2 and T1 through
// the pipeline, assesses the session and records it in Dir/history.db;
// then it charts the history into Dir/history and writes Dir/index.html.
// The noise and placements come from a fixed seed: every run is the same.
func (d *Demo) Run(ctx context.Context) (*DemoResult, error) {
	dbPath := filepath.Join(d.Dir, "history.db")
	db, err := history.Open(dbPath, nil)
	if err != nil {
		return nil, err
	}
	defer db.Close()
	rng := rand.New(rand.NewPCG(2026, 12))
	start := time.Date(2026, 1, 12, 8, 30, 0, 0, time.UTC)
	res := &DemoResult{Index: &report.DemoIndex{Scanner: demoScanner, Phantom: phantom.Demo().Name, History: "history/index.html"}}
	for n := 0; n < d.Sessions; n++ {
		when := start.AddDate(0, n, rng.IntN(7)-3)
		years := when.Sub(start).Hours() / 24 / 365.2425
		temp := math.Round((21+1.5*math.Sin(float64(n)*1.3)+0.3*rng.NormFloat64())*10) / 10
		rot := math.Round(rng.Float64()*360*10) / 10
		center := [3]float64{math.Round(rng.NormFloat64()*80) / 10, math.Round(rng.NormFloat64()*80) / 10, 0}
		dir := "session-" + when.Format("2006-01-02")
		var fits []string
		for _, j := range []struct{ kind, model, noise string }{{"t2", "t2", "rician"}, {"t1-ir", "t1-ir", "gaussian"}} {
			sub := filepath.Join(d.Dir, dir, j.kind)
			if err := os.MkdirAll(sub, 0o755); err != nil {
				return nil, err
			}
			scene := &phantom.Scene{Def: phantom.Demo(), Field: 1.5, Temperature: temp, Center: center, Rotation: rot, Matrix: 96, Slices: 3,
				Sigma: 10, B1: 1, Efficiency: 1, Seed: uint64(100 + n), Shift: map[string]float64{"A7": 1 + demoDrift*years}}
			sim := &pipeline.Simulation{Kind: j.kind, Scene: scene, Scanner: demoScanner, Acquired: when, Temperature: temp, Noise: 10, B1: 1}
			if _, err := pipeline.Simulate(sub, sim); err != nil {
				return nil, err
			}
			c := &pipeline.Config{Series: filepath.Join(sub, j.kind+".nii.gz"), Out: filepath.Join(d.Dir, dir, "fit-"+j.kind),
				Spec: fit.Spec{Model: j.model}, Rician: j.noise == "rician", Version: d.Version}
			// The summary's notes tell of leftovers of an earlier, killed
			// run of the same output, which the fresh demo folder cannot hold.
			if _, err := pipeline.Run(ctx, c, nil); err != nil {
				return nil, err
			}
			fits = append(fits, c.Out)
		}
		s, err := Assess(&Config{Def: "demo", Maps: fits, Options: phantom.Options{
			Session: phantom.Session{Temperature: temp, Field: math.NaN()}, ROIFraction: phantom.DefaultROIFraction,
			Tool: phantom.Tool{Name: "tauvox", Version: d.Version}}})
		if err != nil {
			return nil, err
		}
		if err := s.record(ctx, db, filepath.Join(d.Dir, dir, "qa"), filepath.Join(dir, "qa", "qa.json")); err != nil {
			return nil, err
		}
		qa := s.QA
		if d.Done != nil {
			d.Done(n, when, temp, qa)
		}
		failed := 0
		for _, v := range qa.Vials {
			if v.Verdict == phantom.Fail {
				failed++
			}
		}
		res.Index.Sessions = append(res.Index.Sessions, report.DemoSession{Date: qa.Session.Date, Time: qa.Session.Time,
			Temperature: temp, Verdict: qa.Verdict, Failed: failed, Report: dir + "/qa/report.html"})
		res.Last = qa
	}
	db.Close()
	if err := res.chart(ctx, d.Dir, d.Version); err != nil {
		return nil, err
	}
	return res, report.WriteDemoIndex(filepath.Join(d.Dir, "index.html"), res.Index)
}

// record adds the session to db (as the qa.json at name, relative to the
// database) and writes its files into dir; the report shows a passing
// vial that its history so far flags as warn.
func (s *Session) record(ctx context.Context, db *history.Store, dir, name string) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	b, err := s.JSON()
	if err != nil {
		return err
	}
	if _, err := db.Add(ctx, b, name); err != nil {
		return err
	}
	hist, err := s.HistoryFlags(ctx, db, true)
	if err != nil {
		return err
	}
	return s.Write(dir, hist)
}

// chart analyses the history in dir/history.db with the default settings
// (a drift of at least 1 %/yr counts, projected 12 months ahead) and
// writes the charts into dir/history.
func (r *DemoResult) chart(ctx context.Context, dir, version string) error {
	r.Settings = &history.Settings{Baseline: history.Baseline{N: history.DefaultBaseline}, MinDrift: 1,
		MinLimit: history.DefaultMinLimit, MinSessions: history.DefaultMinSessions, Horizon: 1}
	db, err := history.Open(filepath.Join(dir, "history.db"), &history.Options{ReadOnly: true})
	if err != nil {
		return err
	}
	pts, err := db.Points(ctx, "")
	db.Close()
	if err != nil {
		return err
	}
	r.Series = history.Analyse(pts, r.Settings)
	out := filepath.Join(dir, "history")
	if err := os.MkdirAll(out, 0o755); err != nil {
		return err
	}
	if r.Summary, err = report.WriteHistory(out, r.Series, &report.HistoryOptions{Settings: r.Settings, Source: "history.db", Tool: "tauvox " + version, Context: ctx}); err != nil {
		return err
	}
	r.Index.Summary = report.HistoryHeadline(r.Summary)
	for _, s := range r.Series {
		if s.Drifting {
			r.Index.Drifting = append(r.Index.Drifting, s.Vial+" "+s.Quantity)
		}
	}
	return nil
}
