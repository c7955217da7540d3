package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"path/filepath"
	"time"

	"github.com/tauvox/tauvox/internal/report"

	"github.com/tauvox/tauvox/roi/history"
)

type chartArgs struct {
	db, scanner, out, from, to string
	baseline, minSessions      int
	minDrift, minLimit         float64
	horizon                    float64
	strict                     bool
	force                      forceFlag
	set                        *history.Settings
}

func chartFlags(a *chartArgs, e *env) *flag.FlagSet {
	fs := newFlags("history chart", "--db FILE [--scanner S] --out DIR [options]",
		`Writes one control chart per vial and quantity, index.html (a one-line
summary, sparklines per vial, the series worst first, charts inline) and
drift.csv. Until a series has --baseline sessions each session is judged
against the median and SD of its other sessions (leave-one-out); after that
against the baseline's fixed limits. A series with fewer than --min-sessions
sessions is not judged ("not enough sessions"). The SD is at least the
largest of the vial median's standard error, the reference uncertainty and
--min-limit/3. Rules that flag by default: 1 one session beyond 3 SD; 2 two
of three beyond 2 SD on one side (Western Electric 1956); 5 EWMA (λ 0.2,
3 SD) beyond its limits; 6 drift whose 95 % interval excludes 0 and whose
size is at least --min-drift. Findings: action (the last session outside
the vial's tolerance, or a drift reaching it within --horizon at the end of
its 95 % interval nearest zero) and watch (a rule inside tolerance). Exit
code 1 only for action items, or also for watch items with --strict.`, e)
	fs.StringVar(&a.db, "db", "", "history database file (required)")
	fs.StringVar(&a.scanner, "scanner", "", "only this scanner")
	fs.StringVar(&a.out, "out", "", "output folder (required)")
	fs.Var(&a.force, "force", forceUsage)
	fs.IntVar(&a.baseline, "baseline", history.DefaultBaseline, "baseline: the first N sessions")
	fs.StringVar(&a.from, "baseline-from", "", "baseline: sessions from this date (YYYY-MM-DD) instead")
	fs.StringVar(&a.to, "baseline-to", "", "baseline: sessions up to this date (with --baseline-from)")
	fs.Float64Var(&a.minDrift, "min-drift", 1, "smallest drift that counts, percentage points per year")
	fs.Float64Var(&a.minLimit, "min-limit", history.DefaultMinLimit, "smallest ±3 SD limit half-width, PCT percentage points (0: no user floor)")
	fs.IntVar(&a.minSessions, "min-sessions", history.DefaultMinSessions, "fewest sessions to judge a series (at least 3)")
	fs.Float64Var(&a.horizon, "horizon", 12, "months ahead a drift is projected to the tolerance (action)")
	fs.BoolVar(&a.strict, "strict", false, "exit with code 1 also for watch items")
	return fs
}

func (a *chartArgs) settings() *history.Settings {
	if a.set == nil {
		a.set = &history.Settings{Baseline: history.Baseline{N: a.baseline}, MinDrift: a.minDrift,
			MinLimit: a.minLimit, MinSessions: a.minSessions, Horizon: a.horizon / 12}
		if a.minLimit == 0 {
			a.set.MinLimit = -1 // no user floor
		}
	}
	return a.set
}

// analyseHistory reads the points and computes the statistics.
func analyseHistory(ctx context.Context, a *chartArgs) ([]*history.Series, error) {
	if a.baseline < 2 {
		return nil, errors.New("--baseline must be at least 2 sessions")
	}
	if a.minSessions < 3 {
		return nil, errors.New("--min-sessions must be at least 3")
	}
	if !(a.minLimit >= 0) || a.minLimit > 100 {
		return nil, errors.New("--min-limit must be 0…100 percentage points")
	}
	if !(a.horizon > 0) || a.horizon > 120 {
		return nil, errors.New("--horizon must be 0…120 months (more than 0)")
	}
	set := a.settings()
	if a.from != "" {
		f, err := time.Parse("2006-01-02", a.from)
		if err != nil {
			return nil, fmt.Errorf("--baseline-from %q: want YYYY-MM-DD", a.from)
		}
		set.Baseline.From = f
		if a.to != "" {
			t, err := time.Parse("2006-01-02", a.to)
			if err != nil {
				return nil, fmt.Errorf("--baseline-to %q: want YYYY-MM-DD", a.to)
			}
			set.Baseline.To = t.Add(24*time.Hour - time.Second)
		}
	}
	s, err := openDB(a.db, true)
	if err != nil {
		return nil, err
	}
	defer s.Close()
	pts, err := s.Points(ctx, a.scanner)
	if err != nil {
		return nil, err
	}
	if len(pts) == 0 {
		return nil, fmt.Errorf("%s: no sessions recorded%s", a.db, map[bool]string{true: " for scanner " + a.scanner}[a.scanner != ""])
	}
	return history.Analyse(pts, set), nil
}

func historyChart(ctx context.Context, args []string, e *env) error {
	var a chartArgs
	fs := chartFlags(&a, e)
	if err := parse(fs, args, nil); err != nil {
		return err
	}
	if a.db == "" || a.out == "" {
		return errors.New("--db and --out are required")
	}
	if err := checkOutput(a.out, a.db); err != nil {
		return err
	}
	ss, err := analyseHistory(ctx, &a)
	if err != nil {
		return err
	}
	st, err := newStage(e, a.out, a.force)
	if err != nil {
		return err
	}
	defer st.Abort()
	sum, err := writeCharts(st.Path(""), ss, a.settings(), filepath.Base(a.db))
	if err != nil {
		return err
	}
	if err := st.Commit(); err != nil {
		return err
	}
	driftTable(e, ss)
	fmt.Fprintf(e.stdout, "wrote %s (index.html, drift.csv, charts)\n", a.out)
	fmt.Fprintln(e.stdout, report.HistoryHeadline(sum))
	return chartExit(sum, a.strict, filepath.Join(a.out, report.HistoryIndex))
}

// chartExit is the chart command's result: exit code 1 for action items,
// or for watch items with strict; nil otherwise.
func chartExit(sum *report.HistorySummary, strict bool, see string) error {
	switch {
	case sum.Actions > 0:
		return &exitError{code: 1, err: fmt.Errorf("%d action item(s): see %s", sum.Actions, see)}
	case strict && sum.Watches > 0:
		return &exitError{code: 1, err: fmt.Errorf("%d watch item(s) (--strict): see %s", sum.Watches, see)}
	}
	return nil
}

// writeCharts writes the charts, index.html and drift.csv of ss into the
// existing folder dir and returns the summary.
func writeCharts(dir string, ss []*history.Series, set *history.Settings, source string) (*report.HistorySummary, error) {
	if err := mkdirAll(dir); err != nil {
		return nil, err
	}
	return report.WriteHistory(dir, ss, &report.HistoryOptions{Settings: set, Source: source, Tool: "tauvox " + version()})
}
