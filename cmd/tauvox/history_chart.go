package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"path/filepath"

	"github.com/tauvox/tauvox/internal/cli"
	"github.com/tauvox/tauvox/internal/qarun"
	"github.com/tauvox/tauvox/internal/report"
	"github.com/tauvox/tauvox/roi/history"
)

type chartArgs struct {
	db, scanner, out, from, to string
	baseline, minSessions      int
	minDrift, minLimit, driftC float64
	horizon                    float64
	strict                     bool
	force                      cli.Force
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
3 SD) beyond its limits; 6 drift whose --drift-confidence interval
(default 99.73 %) excludes 0 and whose size is at least --min-drift.
Findings describe the last session: action (it, or the mean of the last
three, lies beyond the vial's tolerance by more than its expanded
uncertainty 2u, u the series' own session-to-session SD; or a drift reaches
the tolerance within --horizon at the end of its interval nearest zero) and
watch (a rule on the last session, or a drift). A session outside its
tolerance by less than 2u is reported as not proven, and earlier flagged
sessions stay on the chart and in the reasons; neither flags the series.
Exit code 1 only for action items, or also for watch items with --strict.`, e)
	fs.StringVar(&a.db, "db", "", "history database file (required)")
	fs.StringVar(&a.scanner, "scanner", "", "only this scanner")
	fs.StringVar(&a.out, "out", "", "output folder (required)")
	fs.Var(&a.force, "force", cli.ForceUsage)
	fs.IntVar(&a.baseline, "baseline", history.DefaultBaseline, "baseline: the first N sessions")
	fs.StringVar(&a.from, "baseline-from", "", "baseline: sessions from this date (YYYY-MM-DD) instead")
	fs.StringVar(&a.to, "baseline-to", "", "baseline: sessions up to this date (with --baseline-from)")
	fs.Float64Var(&a.minDrift, "min-drift", 1, "smallest drift that counts, percentage points per year")
	fs.Float64Var(&a.driftC, "drift-confidence", 100*history.DefaultDriftConfidence, "confidence of the drift slope's interval, PCT percent (50–99.99)")
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
		MinLimit: a.minLimit, MinSessions: a.minSessions, Horizon: a.horizon, DriftConfidence: a.driftC}).Settings()
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
