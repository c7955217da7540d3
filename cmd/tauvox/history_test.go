package main

import (
	"encoding/csv"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/internal/report"
)

// checkExportDeviations: every row of `history export --csv` carries the
// signed deviation 100·(median − reference)/reference of its own median
// and reference (design.md; qa.json), to the rounding of the printed
// columns (median and reference with 3 decimals, deviation with 4: at most
// 0.005 percentage points for references above 20 ms; tolerance 0.01).
// Rows of both signs must occur in the demo's sessions.
func checkExportDeviations(t *testing.T, out string) {
	t.Helper()
	rows, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil || len(rows) < 2 {
		t.Fatalf("export: %v", err)
	}
	col := map[string]int{}
	for i, h := range rows[0] {
		col[h] = i
	}
	neg, pos := 0, 0
	for _, r := range rows[1:] {
		med, e1 := strconv.ParseFloat(r[col["median_ms"]], 64)
		ref, e2 := strconv.ParseFloat(r[col["reference_ms"]], 64)
		dev, e3 := strconv.ParseFloat(r[col["deviation_pct"]], 64)
		if e1 != nil || e2 != nil || e3 != nil {
			continue // not measured, or no reference
		}
		if want := 100 * (med - ref) / ref; math.Abs(dev-want) > 0.01 {
			t.Errorf("export row %v: deviation %g %%, 100·(median − reference)/reference = %g %%", r, dev, want)
		}
		if dev < 0 {
			neg++
		} else if dev > 0 {
			pos++
		}
	}
	if neg == 0 || pos == 0 {
		t.Errorf("export: %d negative and %d positive deviations, want both", neg, pos)
	}
}

// TestHistoryCommands: add is idempotent, list and export show the
// sessions, remove needs --yes, chart writes its files and exits 1 when a
// rule is violated; bad inputs are one line with exit 2.
func TestHistoryCommands(t *testing.T) {
	dir := t.TempDir()
	demo := filepath.Join(dir, "demo")
	if code, _, stderr := tauvox(t, "demo", "--out", demo, "--sessions", "4"); code != 0 {
		t.Fatal(stderr)
	}
	qas, _ := filepath.Glob(filepath.Join(demo, "session-*", "qa", "qa.json"))
	if len(qas) != 4 {
		t.Fatalf("%d qa.json files", len(qas))
	}
	db := filepath.Join(dir, "h.db")
	code, stdout, stderr := tauvox(t, append([]string{"history", "add", "--db", db}, qas...)...)
	if code != 0 || strings.Count(stdout, "recorded as session") != 4 {
		t.Fatalf("add: %d %s %s", code, stdout, stderr)
	}
	code, stdout, _ = tauvox(t, "history", "add", "--db", db, qas[0])
	if code != 0 || !strings.Contains(stdout, "already recorded") {
		t.Errorf("second add: %d %s", code, stdout)
	}
	code, stdout, _ = tauvox(t, "history", "list", "--db", db)
	if code != 0 || !strings.Contains(stdout, "4 sessions") || !strings.Contains(stdout, "HARBOUR-MR2") {
		t.Errorf("list: %s", stdout)
	}
	code, stdout, _ = tauvox(t, "history", "export", "--db", db, "--csv")
	if code != 0 || strings.Count(stdout, "\n") != 1+4*20 || !strings.HasPrefix(stdout, "session,scanner,acquired,") {
		t.Errorf("export: %d lines", strings.Count(stdout, "\n"))
	}
	checkExportDeviations(t, stdout)
	out := filepath.Join(dir, "charts")
	code, stdout, stderr = tauvox(t, "history", "chart", "--db", db, "--out", out, "--baseline", "3")
	if code != 0 && code != 1 {
		t.Fatalf("chart: %d %s", code, stderr)
	}
	b, err := os.ReadFile(filepath.Join(out, "drift.csv"))
	// The columns of earlier versions first, new ones at the end.
	if err != nil || !strings.HasPrefix(string(b), "scanner,vial,quantity,sessions,baseline_mean,last_value,slope_pct_per_year,slope_ci_low,slope_ci_high,violations,finding,") {
		t.Errorf("drift.csv: %v %q", err, b)
	}
	if _, err := os.Stat(filepath.Join(out, "index.html")); err != nil {
		t.Error(err)
	}
	// Four sessions are fewer than the five needed: nothing is judged,
	// no exit 1, and never a green "in control".
	if code != 0 || !strings.Contains(stdout, "20 of 20 series not judged: not enough sessions (4 of 5).") || strings.Contains(stdout, "in control") {
		t.Errorf("exit %d with %q", code, stdout)
	}
	idx, _ := os.ReadFile(filepath.Join(out, "index.html"))
	if !strings.Contains(string(idx), `class="verdict too-few"`) {
		t.Error("index of a too-short history is not marked as not judged")
	}
	if code, _, stderr := tauvox(t, "history", "remove", "--db", db, "--id", "2"); code != 2 || !strings.Contains(stderr, "--yes") {
		t.Errorf("remove without --yes: %d %s", code, stderr)
	}
	if code, stdout, _ := tauvox(t, "history", "remove", "--db", db, "--id", "2", "--yes"); code != 0 || !strings.Contains(stdout, "removed session 2") {
		t.Errorf("remove: %d %s", code, stdout)
	}

	bad := filepath.Join(dir, "bad.json")
	os.WriteFile(bad, []byte(`{"format":"tauvox-qa/9"}`), 0o644)
	corrupt := filepath.Join(dir, "corrupt.db")
	os.WriteFile(corrupt, []byte(strings.Repeat("not sqlite at all ", 200)), 0o644)
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"history", "add", "--db", db, bad}, `format "tauvox-qa/9"`},
		{[]string{"history", "add", "--db", corrupt, qas[0]}, "corrupt.db"},
		{[]string{"history", "list", "--db", filepath.Join(dir, "none.db")}, "none.db"},
		{[]string{"history", "chart", "--db", db}, "--db and --out are required"},
		{[]string{"history", "frobnicate"}, `unknown history subcommand "frobnicate"`},
	} {
		code, _, stderr := tauvox(t, c.args...)
		if code != 2 || !strings.Contains(stderr, c.want) || strings.Count(strings.TrimSpace(stderr), "\n") > 0 {
			t.Errorf("%v: %d %q, want …%s", c.args, code, stderr, c.want)
		}
	}
	if b, _ := os.ReadFile(corrupt); !strings.HasPrefix(string(b), "not sqlite") {
		t.Error("corrupt database changed")
	}
}

// TestChartExit: exit code 1 only for action items, unless --strict makes
// watch items count too; too-few and in-control series never exit 1.
func TestChartExit(t *testing.T) {
	for _, c := range []struct {
		sum    report.HistorySummary
		strict bool
		want   string // "" for success
	}{
		{report.HistorySummary{}, false, ""},
		{report.HistorySummary{TooFew: 20}, true, ""},
		{report.HistorySummary{Watches: 2}, false, ""},
		{report.HistorySummary{Watches: 2}, true, "2 watch item(s) (--strict)"},
		{report.HistorySummary{Actions: 1, Watches: 1}, false, "1 action item(s)"},
	} {
		err := chartExit(&c.sum, c.strict, "charts/index.html")
		var ee *exitError
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%+v strict %v: %v, want success", c.sum, c.strict, err)
		case c.want != "" && (!errors.As(err, &ee) || ee.code != 1 || !strings.Contains(err.Error(), c.want)):
			t.Errorf("%+v strict %v: %v, want exit 1 with %q", c.sum, c.strict, err, c.want)
		}
	}
}
