package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"path/filepath"
	"time"

	"github.com/tauvox/tauvox/io/report"

	"github.com/tauvox/tauvox/roi/history"
)

type chartArgs struct {
	db, scanner, out, from, to string
	baseline                   int
	minDrift                   float64
	force                      bool
	set                        *history.Settings
}

func chartFlags(a *chartArgs, e *env) *flag.FlagSet {
	fs := newFlags("history chart", "--db FILE [--scanner S] --out DIR [options]",
		`Writes one control chart per vial and quantity, index.html (vials worst
first, charts inline) and drift.csv. Rules: 1 one point beyond 3 SD; 2 two of
three beyond 2 SD on one side; 3 four of five beyond 1 SD on one side; 4 eight
in a row on one side (Western Electric 1956); 5 EWMA (λ 0.2, 3 SD) beyond its
limits; 6 drift whose 95 % interval excludes 0 and whose size is at least
--min-drift. Baseline points set the limits and are not judged. Exit code 1
when any rule is violated.`, e)
	fs.StringVar(&a.db, "db", "", "history database file (required)")
	fs.StringVar(&a.scanner, "scanner", "", "only this scanner")
	fs.StringVar(&a.out, "out", "", "output folder (required)")
	fs.BoolVar(&a.force, "force", false, "replace an existing output folder")
	fs.IntVar(&a.baseline, "baseline", 12, "baseline: the first N sessions")
	fs.StringVar(&a.from, "baseline-from", "", "baseline: sessions from this date (YYYY-MM-DD) instead")
	fs.StringVar(&a.to, "baseline-to", "", "baseline: sessions up to this date (with --baseline-from)")
	fs.Float64Var(&a.minDrift, "min-drift", 1, "smallest drift that counts, percentage points per year")
	return fs
}

func (a *chartArgs) settings() *history.Settings {
	if a.set == nil {
		a.set = &history.Settings{Baseline: history.Baseline{N: a.baseline}, MinDrift: a.minDrift}
	}
	return a.set
}

// analyseHistory reads the points and computes the statistics.
func analyseHistory(ctx context.Context, a *chartArgs) ([]*history.Series, error) {
	if a.baseline < 2 {
		return nil, errors.New("--baseline must be at least 2 sessions")
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
	violated, err := writeCharts(st.Path(""), ss, a.settings(), filepath.Base(a.db))
	if err != nil {
		return err
	}
	if err := st.Commit(); err != nil {
		return err
	}
	driftTable(e, ss)
	fmt.Fprintf(e.stdout, "wrote %s (index.html, drift.csv, charts)\n", a.out)
	if violated {
		return &exitError{code: 1, err: errors.New("rules violated: see " + filepath.Join(a.out, report.HistoryIndex))}
	}
	return nil
}

// writeCharts writes the charts, index.html and drift.csv of ss into the
// existing folder dir and reports whether any rule was violated.
func writeCharts(dir string, ss []*history.Series, set *history.Settings, source string) (bool, error) {
	if err := mkdirAll(dir); err != nil {
		return false, err
	}
	sum, err := report.WriteHistory(dir, ss, &report.HistoryOptions{Settings: set, Source: source, Tool: "tauvox " + version()})
	if err != nil {
		return false, err
	}
	return sum.Violations, nil
}
