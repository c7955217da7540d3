package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"path/filepath"

	"github.com/tauvox/tauvox/internal/qarun"
	"github.com/tauvox/tauvox/internal/report"
	"github.com/tauvox/tauvox/roi/history"
)

type chartArgs struct {
	db, scanner, out, from, to string
	baseline, minSessions      int
	minDrift, minLimit         float64
	horizon                    float64
	force, strict              bool
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
	fs.BoolVar(&a.force, "force", false, "replace an existing output folder")
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
	set, err := (&qarun.ChartOptions{Baseline: a.baseline, From: a.from, To: a.to, MinDrift: a.minDrift,
		MinLimit: a.minLimit, MinSessions: a.minSessions, Horizon: a.horizon}).Settings()
	if err != nil {
		return err
	}
	ss, err := qarun.Analyse(ctx, a.db, a.scanner, set)
	if err != nil {
		return err
	}
	st, err := newStage(e, a.out, a.force)
	if err != nil {
		return err
	}
	defer st.Abort()
	sum, err := qarun.WriteCharts(ctx, st.Path(""), ss, set, filepath.Base(a.db), "tauvox "+version())
	if err != nil {
		return err
	}
	if err := st.Commit(); err != nil {
		return err
	}
	driftTable(e, ss)
	fmt.Fprintf(e.stdout, "wrote %s (index.html, drift.csv, charts)\n", a.out)
	fmt.Fprintln(e.stdout, oneLine(report.HistoryHeadline(sum)))
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
