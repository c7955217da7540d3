package report

import (
	"bytes"
	"encoding/base64"
	"encoding/csv"
	"flag"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/tauvox/tauvox/roi/history"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/")

// Hostile names for the history pages, as a qa.json could carry them.
const (
	hostileHistScanner = `../../etc<script>`
	hostileHistVial    = `"><img src=x onerror=console.log("tauvox-injected")>`
)

// historyDates are 20 invented session dates, unevenly spaced (3 to 7
// weeks apart, with one gap of 3 months).
func historyDates() []time.Time {
	gaps := []int{0, 28, 35, 21, 42, 30, 28, 49, 21, 35, 28, 30, 91, 28, 35, 21, 42, 28, 30, 35}
	t := time.Date(2025, 1, 6, 8, 30, 0, 0, time.UTC)
	var out []time.Time
	for _, g := range gaps {
		t = t.AddDate(0, 0, g)
		out = append(out, t)
	}
	return out
}

// noise is an invented, deterministic scatter of about ±0.4 % that
// completes no run rule over 20 sessions.
func noise(i, k int) float64 {
	return 0.4 * math.Sin(2.39996*float64(i)+1.3*float64(k)+0.5)
}

// historyPoints builds the invented record: scanner MR-3 with vials A1
// (stable), A2 (drifting by −3 %/yr), B1 (stable but one session at
// +5 %, rule 1), a T2 of A1 without reference (relative), C1 with only
// two sessions (no slope); with hostile, a second scanner with a
// hostile name and vial.
func historyPoints(hostile bool) []history.Point {
	dates := historyDates()
	t0 := dates[0]
	var ps []history.Point
	add := func(scanner, vial, q string, i int, dev, median float64) {
		ps = append(ps, history.Point{
			SessionID: int64(i + 1), Scanner: scanner, Acquired: dates[i].Format("2006-01-02 15:04"), Time: dates[i],
			Vial: vial, Quantity: q, N: 100, Median: median, Mean: median, SD: 0.02 * median,
			Reference: 500, Deviation: dev, Tolerance: 25, Field: 1.5, Temperature: 20 + float64(i%5)/2,
		})
	}
	for i, d := range dates {
		years := d.Sub(t0).Hours() / 24 / 365.2425
		add("MR-3", "A1", "T1", i, 0.3+noise(i, 1), 501.5)
		add("MR-3", "A2", "T1", i, -0.2-3*years+noise(i, 2), 499)
		b1 := -0.5 + noise(i, 3)
		if i == 15 {
			b1 = 5
		}
		add("MR-3", "B1", "T1", i, b1, 497.5)
		add("MR-3", "A1", "T2", i, math.NaN(), 80*(1+noise(i, 4)/100))
		ps[len(ps)-1].Reference = math.NaN()
		if i >= 18 {
			add("MR-3", "C1", "T1", i, 1.0+noise(i, 5), 505)
		}
		if hostile {
			add(hostileHistScanner, hostileHistVial, "T1", i, noise(i, 6), 500)
			add("MR/3", "A1", "T1", i, noise(i, 7), 500) // file name collides with MR_3 below
			add("MR_3", "A1", "T1", i, noise(i, 8), 500)
		}
	}
	sort.SliceStable(ps, func(a, b int) bool {
		pa, pb := ps[a], ps[b]
		if pa.Scanner != pb.Scanner {
			return pa.Scanner < pb.Scanner
		}
		if pa.Vial != pb.Vial {
			return pa.Vial < pb.Vial
		}
		if pa.Quantity != pb.Quantity {
			return pa.Quantity < pb.Quantity
		}
		return pa.Time.Before(pb.Time)
	})
	return ps
}

func writeHistoryTest(t *testing.T, hostile bool) (string, *HistorySummary) {
	t.Helper()
	dir := t.TempDir()
	series := history.Analyse(historyPoints(hostile), nil)
	sum, err := WriteHistory(dir, series, &HistoryOptions{Source: "stability.db", Tool: "tauvox 0.0.0-test"})
	if err != nil {
		t.Fatal(err)
	}
	return dir, sum
}

func find(sum *HistorySummary, scanner, vial, q string) *HistoryRow {
	for i := range sum.Rows {
		s := sum.Rows[i].Series
		if s.Scanner == scanner && s.Vial == vial && s.Quantity == q {
			return &sum.Rows[i]
		}
	}
	return nil
}

// TestHistoryInvented checks that the invented record shows what it was
// built to show, so the other tests see a drift, a rule 1 and quiet
// vials.
func TestHistoryInvented(t *testing.T) {
	_, sum := writeHistoryTest(t, false)
	if len(sum.Rows) != 5 {
		t.Fatalf("%d rows, want 5", len(sum.Rows))
	}
	a2 := find(sum, "MR-3", "A2", "T1")
	// Truth of the invented drift: −3 %/yr (tolerance 0.3 %/yr for the
	// ±0.4 % scatter over 1.9 years).
	if a2 == nil || !a2.Series.Drifting || math.Abs(a2.Series.Slope+3) > 0.3 {
		t.Fatalf("A2 T1 = %+v, want drifting at −3 %%/yr", a2)
	}
	if b1 := find(sum, "MR-3", "B1", "T1"); b1 == nil || len(b1.Series.Violations) == 0 || b1.Series.Violations[0] != 1 {
		t.Errorf("B1 T1 violations %v, want rule 1 first", b1.Series.Violations)
	}
	if a1 := find(sum, "MR-3", "A1", "T1"); a1 == nil || len(a1.Series.Violations) != 0 {
		t.Errorf("A1 T1 violations %v, want none", a1.Series.Violations)
	}
	if r := find(sum, "MR-3", "A1", "T2"); r == nil || !r.Series.Relative {
		t.Error("A1 T2 should be relative (no reference)")
	}
	if !sum.Violations {
		t.Error("summary reports no violation")
	}
	if !sum.From.Equal(historyDates()[0]) || !sum.To.Equal(historyDates()[19]) || len(sum.Scanners) != 1 {
		t.Errorf("summary range %v–%v scanners %q", sum.From, sum.To, sum.Scanners)
	}
}

// TestHistoryWorstFirst checks the order of the summary, the table and
// drift.csv: action, watch, too few, in control; then drifting first,
// then by number of rules, then |slope|.
func TestHistoryWorstFirst(t *testing.T) {
	dir, sum := writeHistoryTest(t, false)
	for i := 1; i < len(sum.Rows); i++ {
		a, b := sum.Rows[i-1].Series, sum.Rows[i].Series
		switch {
		case findingRank(a.Finding) != findingRank(b.Finding):
			if findingRank(a.Finding) > findingRank(b.Finding) {
				t.Errorf("row %d (%s) before row %d (%s)", i-1, a.Finding, i, b.Finding)
			}
		case a.Drifting != b.Drifting:
			if !a.Drifting {
				t.Errorf("row %d not drifting before drifting row %d", i-1, i)
			}
		case len(a.Violations) != len(b.Violations):
			if len(a.Violations) < len(b.Violations) {
				t.Errorf("row %d (%v) before row %d (%v)", i-1, a.Violations, i, b.Violations)
			}
		case !math.IsNaN(b.Slope) && (math.IsNaN(a.Slope) || math.Abs(a.Slope) < math.Abs(b.Slope)):
			t.Errorf("row %d slope %g before row %d slope %g", i-1, a.Slope, i, b.Slope)
		}
	}
	if s := sum.Rows[0].Series; s.Vial != "A2" {
		t.Errorf("first row %s %s, want the drifting A2", s.Vial, s.Quantity)
	}
	// C1 (not enough sessions) comes right after the action and watch
	// items, before the series in control.
	for i, r := range sum.Rows {
		s := r.Series
		if s.Finding == history.FindingAction || s.Finding == history.FindingWatch {
			continue
		}
		if s.Vial != "C1" || s.Finding != history.FindingTooFew {
			t.Errorf("row %d %s %s (%s), want C1, not enough sessions, before the series in control", i, s.Vial, s.Quantity, s.Finding)
		}
		break
	}
	// The page lists the vials in the same order.
	b, err := os.ReadFile(filepath.Join(dir, HistoryIndex))
	if err != nil {
		t.Fatal(err)
	}
	page := string(b)
	last := -1
	for i, r := range sum.Rows {
		at := strings.Index(page, `<a href="#c`+strconv.Itoa(i+1)+`">`+r.Series.Vial+`</a>`)
		if at < last {
			t.Errorf("row %d (%s) out of order in the table", i, r.Series.Vial)
		}
		last = at
	}
}

// TestHistoryCSV checks drift.csv against the golden file (regenerate
// with go test -run TestHistoryCSV -update after a deliberate change) and
// structurally against the summary: exact header, one row per series,
// violations joined with ';', NaN written empty.
func TestHistoryCSV(t *testing.T) {
	dir, sum := writeHistoryTest(t, false)
	got, err := os.ReadFile(filepath.Join(dir, HistoryCSV))
	if err != nil {
		t.Fatal(err)
	}
	golden := filepath.Join("testdata", "history_drift.csv")
	if *update {
		if err := os.MkdirAll("testdata", 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(golden, got, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatalf("%v (run with -update to create it)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("drift.csv differs from %s:\n%s\nwant\n%s", golden, got, want)
	}

	recs, err := csv.NewReader(bytes.NewReader(got)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	// The columns of earlier versions come first, unchanged.
	if h := strings.Join(recs[0], ","); h != "scanner,vial,quantity,sessions,baseline_mean,last_value,slope_pct_per_year,slope_ci_low,slope_ci_high,violations,finding,last_mode,modes,limit_sd_floor,tolerance_pct,reasons" {
		t.Errorf("header %q", h)
	}
	if len(recs) != 1+len(sum.Rows) {
		t.Fatalf("%d records, want %d", len(recs), 1+len(sum.Rows))
	}
	for i, r := range sum.Rows {
		s := r.Series
		rec := recs[i+1]
		want := []string{s.Scanner, s.Vial, s.Quantity, strconv.Itoa(r.Sessions), csvNum(s.BaselineMean), f4(r.Last), f4(s.Slope), f4(s.SlopeLow), f4(s.SlopeHigh), joinInts(s.Violations),
			s.Finding, lastMode(s), modeLetters(s.Mode), f4(s.Floor), f4(lastFinite(s.TolPct, s.Value)), strings.Join(s.Reasons, "; ")}
		if strings.Join(rec, "|") != strings.Join(want, "|") {
			t.Errorf("row %d = %q, want %q", i+1, rec, want)
		}
	}
	var c1 []string
	for _, rec := range recs[1:] {
		if rec[1] == "C1" {
			c1 = rec
		}
	}
	if c1 == nil || c1[1] != "C1" || c1[3] != "2" || c1[6] != "" || c1[7] != "" || c1[8] != "" || c1[10] != "too-few" || c1[12] != "TT" || c1[15] != "not enough sessions (2 of 5)" {
		t.Errorf("C1 (2 sessions, no slope) = %q, want empty slope fields, too few", c1)
	}
	for _, rec := range recs[1:] {
		if rec[1] == "A1" && rec[2] == "T1" && rec[9] != "" {
			t.Errorf("A1 T1 violations %q, want empty", rec[9])
		}
	}
	if rec := recs[1]; rec[1] != "A2" || !strings.Contains(rec[9], ";6") || rec[10] != "action" || rec[11] != "fixed-baseline" || rec[12] != "LLLLLLLLLLLLFFFFFFFF" {
		t.Errorf("first row %q, want A2, action, with rule 6 among ';'-separated rules, 12 leave-one-out then fixed", rec)
	}
}

func f4(v float64) string {
	if math.IsNaN(v) {
		return ""
	}
	return strconv.FormatFloat(v, 'f', 4, 64)
}

func joinInts(r []int) string {
	s := make([]string, len(r))
	for i, k := range r {
		s[i] = strconv.Itoa(k)
	}
	return strings.Join(s, ";")
}

// TestHistoryNames checks that chart names taken from hostile scanner and
// vial names are safe file names, distinct (MR/3 and MR_3 collide), and
// exist.
func TestHistoryNames(t *testing.T) {
	dir, sum := writeHistoryTest(t, true)
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	safe := regexp.MustCompile(`^[A-Za-z0-9+-]([A-Za-z0-9.+_-]*[A-Za-z0-9+-])?\.svg$`)
	files := map[string]bool{}
	for _, e := range ents {
		n := e.Name()
		if n == HistoryIndex || n == HistoryCSV {
			continue
		}
		if !safe.MatchString(n) || strings.Contains(n, "..") || len(n) > 3*maxComponent+12 {
			t.Errorf("unsafe chart name %q", n)
		}
		files[n] = true
	}
	if len(files) != len(sum.Rows) || len(ents) != len(sum.Rows)+2 {
		t.Errorf("%d charts and %d entries for %d series", len(files), len(ents), len(sum.Rows))
	}
	for _, r := range sum.Rows {
		if !files[r.Chart] {
			t.Errorf("chart %q of %s %s not written", r.Chart, r.Series.Scanner, r.Series.Vial)
		}
	}
	if r := find(sum, hostileHistScanner, hostileHistVial, "T1"); r == nil || r.Chart != "etc_script_img_src_x_onerror_console.log_tauvox-injected_T1.svg" {
		t.Errorf("hostile chart name %+v", r)
	}
	a, b := find(sum, "MR/3", "A1", "T1"), find(sum, "MR_3", "A1", "T1")
	if a == nil || b == nil || a.Chart == b.Chart || !strings.HasPrefix(a.Chart, "MR_3_A1_T1") || !strings.HasPrefix(b.Chart, "MR_3_A1_T1") {
		t.Errorf("colliding names: %q and %q", a.Chart, b.Chart)
	}
}

func TestSafeComponent(t *testing.T) {
	long := strings.Repeat("x", 300)
	for _, c := range []struct{ in, want string }{
		{"MR-3", "MR-3"},
		{"../../etc<script>", "etc_script"},
		{"..", "unnamed"},
		{"", "unnamed"},
		{"a/b\\c", "a_b_c"},
		{"vial\x00\n\x1b[31m", "vial_31m"},
		{"-rf", "rf"},
		{".hidden", "hidden"},
		{"A...B", "A.B"},
		{"Größe 1", "Gr_e_1"},
		{"T2*", "T2"},
		{long, strings.Repeat("x", maxComponent)},
		{"a" + strings.Repeat("/", 1000) + "b", "a_b"},
	} {
		if got := safeComponent(c.in); got != c.want {
			t.Errorf("safeComponent(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}

// TestHistoryEscaped checks that hostile names are escaped on the page
// and absent raw, that the page and every chart (files and embedded) are
// well-formed XML, and that the page is self-contained.
func TestHistoryEscaped(t *testing.T) {
	dir, sum := writeHistoryTest(t, true)
	b, err := os.ReadFile(filepath.Join(dir, HistoryIndex))
	if err != nil {
		t.Fatal(err)
	}
	srcs := wellFormed(t, b)
	page := string(b)
	for _, raw := range []string{hostileHistScanner, hostileHistVial, "<script", "<img src=x"} {
		if strings.Contains(page, raw) {
			t.Errorf("raw hostile text %q appears in the page", raw)
		}
	}
	for _, esc := range []string{`../../etc&lt;script&gt;`, `&#34;&gt;&lt;img src=x onerror=console.log(&#34;tauvox-injected&#34;)&gt;`} {
		if !strings.Contains(page, esc) {
			t.Errorf("escaped text %q missing", esc)
		}
	}
	for _, bad := range []string{"http:", "https:", "url(", "<link"} {
		if strings.Contains(page, bad) {
			t.Errorf("page contains %q", bad)
		}
	}
	for _, want := range []string{
		"<title>Stability history: ../../etc&lt;script&gt;, MR-3, MR/3, MR_3, 2025-01-06 to 2026-10-25</title>",
		"Western Electric, Statistical Quality Control Handbook, 1956",
		"the first 12 sessions",
		"percentage points per year",
		"|slope| ≥ 1 %/yr",
		"<code>stability.db</code>",
	} {
		if !strings.Contains(page, want) {
			t.Errorf("page lacks %q", want)
		}
	}
	if len(srcs) != 2*len(sum.Rows) {
		t.Errorf("%d images for %d series, want a sparkline and a chart each", len(srcs), len(sum.Rows))
	}
	for _, uri := range srcs {
		data, ok := strings.CutPrefix(uri, "data:image/svg+xml;base64,")
		if !ok {
			t.Fatalf("image source %.40q is not an SVG data: URI", uri)
		}
		raw, err := base64.StdEncoding.DecodeString(data)
		if err != nil {
			t.Fatal(err)
		}
		wellFormed(t, raw)
	}
	for _, r := range sum.Rows {
		svg, err := os.ReadFile(filepath.Join(dir, r.Chart))
		if err != nil {
			t.Fatal(err)
		}
		wellFormed(t, svg)
		if bytes.Contains(svg, []byte("<script")) || bytes.Contains(svg, []byte("<img")) {
			t.Errorf("%s carries a raw hostile name", r.Chart)
		}
	}
}

// TestHistoryChartContent checks the legend texts of the drifting vial's
// chart: the drift with its interval, the limits and the reference line.
func TestHistoryChartContent(t *testing.T) {
	dir, sum := writeHistoryTest(t, false)
	a2 := find(sum, "MR-3", "A2", "T1")
	svg, err := os.ReadFile(filepath.Join(dir, a2.Chart))
	if err != nil {
		t.Fatal(err)
	}
	s := a2.Series
	want := []string{
		"drift " + strings.TrimSuffix(pct(s.Slope, 1), " %") + " %/yr [" + strings.TrimSuffix(pct(s.SlopeLow, 1), " %") + ", " + strings.TrimSuffix(pct(s.SlopeHigh, 1), " %") + "] rule 6",
		"±2 SD", "±3 SD", "reference (0 % deviation)", "baseline session (n = 12)", "EWMA, λ = 0.2", "EWMA limits",
		"tolerance ±5.0 %", "end of baseline (12 sessions)", "session temperature (20.0–22.0 °C)",
		"2025", "2026",
	}
	// Sessions outside the tolerance: beyond it by more than 2u (action
	// cross) or within 2u (not proven, open ring), each with its legend.
	var beyond, unproven, ring int
	for i := range s.Points {
		switch {
		case s.Beyond[i]:
			beyond++
		case s.Outside[i]:
			unproven++
			if !s.Flagged(i) {
				ring++
			}
		}
	}
	if beyond+unproven == 0 {
		t.Fatal("A2 T1 has no session outside its tolerance; the test needs one")
	}
	if beyond > 0 {
		want = append(want, "beyond tolerance by more than 2u", ">tol<")
	}
	if unproven > 0 {
		want = append(want, "tol?")
	}
	if ring > 0 {
		want = append(want, "outside tolerance, within 2u (not proven)")
	}
	t.Logf("A2 T1: %d session(s) beyond the tolerance, %d outside it but not proven (%d drawn as rings)", beyond, unproven, ring)
	for _, w := range want {
		if !bytes.Contains(svg, []byte(w)) {
			t.Errorf("chart lacks %q", w)
		}
	}
	b1, err := os.ReadFile(filepath.Join(dir, find(sum, "MR-3", "B1", "T1").Chart))
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(b1, []byte("watch: a rule (label)")) {
		t.Error("B1 chart lacks the watch marker")
	}
	// The relative series has no reference line.
	rel, err := os.ReadFile(filepath.Join(dir, find(sum, "MR-3", "A1", "T2").Chart))
	if err != nil {
		t.Fatal(err)
	}
	if bytes.Contains(rel, []byte("reference (0 %")) || !bytes.Contains(rel, []byte("relative to baseline median (%)")) {
		t.Error("relative chart labelled as a deviation from reference")
	}
}

func TestDateTicks(t *testing.T) {
	unix := func(y int, m time.Month, d int) float64 {
		return float64(time.Date(y, m, d, 0, 0, 0, 0, time.UTC).Unix())
	}
	for _, c := range []struct {
		name     string
		min, max float64
		labels   string
	}{
		{"two years by quarter", unix(2024, 12, 20), unix(2026, 11, 3), "2025-01 2025-04 2025-07 2025-10 2026-01 2026-04 2026-07 2026-10"},
		{"five years by year", unix(2021, 3, 1), unix(2026, 2, 1), "2022 2023 2024 2025 2026"},
		{"a month by week, on Mondays", unix(2025, 3, 1), unix(2025, 4, 1), "2025-03-03 2025-03-10 2025-03-17 2025-03-24 2025-03-31"},
	} {
		var got []string
		for _, tk := range (dateTicks{}).Ticks(c.min, c.max) {
			if tk.Value < c.min || tk.Value > c.max {
				t.Errorf("%s: tick %v outside the axis", c.name, tk.Value)
			}
			if tk.Label != "" {
				got = append(got, tk.Label)
			}
		}
		if g := strings.Join(got, " "); g != c.labels {
			t.Errorf("%s: labels %q, want %q", c.name, g, c.labels)
		}
	}
	for _, tk := range (dateTicks{blank: true}).Ticks(unix(2024, 12, 20), unix(2026, 11, 3)) {
		if strings.TrimSpace(tk.Label) != "" {
			t.Errorf("blank ticker labelled %q", tk.Label)
		}
	}
}

func TestHistoryErrors(t *testing.T) {
	dir := t.TempDir()
	missing := filepath.Join(dir, "no")
	if _, err := WriteHistory(missing, nil, nil); err == nil || !strings.Contains(err.Error(), missing) {
		t.Errorf("missing folder: %v", err)
	}
	series := history.Analyse(historyPoints(false), nil)
	series[1].Value = series[1].Value[:3]
	if _, err := WriteHistory(dir, series, nil); err == nil || !strings.Contains(err.Error(), "series 1") || !strings.Contains(err.Error(), "3 values for 20 points") {
		t.Errorf("short values: %v", err)
	}
	if _, err := WriteHistory(dir, []*history.Series{nil}, nil); err == nil || !strings.Contains(err.Error(), "nil series") {
		t.Errorf("nil series: %v", err)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Errorf("failed writes left %d entries", len(ents))
	}
	// No series: an empty table, a header-only drift.csv, no violation.
	sum, err := WriteHistory(dir, nil, nil)
	if err != nil || sum.Violations || len(sum.Rows) != 0 {
		t.Fatalf("empty: %+v, %v", sum, err)
	}
	b, _ := os.ReadFile(filepath.Join(dir, HistoryCSV))
	if string(b) != strings.Join(HistoryColumns, ",")+"\n" {
		t.Errorf("empty drift.csv = %q", b)
	}
	page, _ := os.ReadFile(filepath.Join(dir, HistoryIndex))
	wellFormed(t, page)
	if !bytes.Contains(page, []byte("No sessions recorded.")) {
		t.Error("empty page lacks its note")
	}
}

// TestHistoryChromium opens index.html (with hostile names) in headless
// Chromium as TestChromiumRenders does: the page must draw and log
// nothing to the console.
func TestHistoryChromium(t *testing.T) {
	dir, _ := writeHistoryTest(t, true)
	img := screenshot(t, filepath.Join(dir, HistoryIndex))
	// The table, the notes and at least one chart fill the first 2000
	// pixels: hundreds of colours (antialiased text and lines) and some
	// ink; a blank or broken page has a handful of colours.
	colours, ink := census(img)
	if colours < 100 || ink < 0.03 {
		t.Errorf("screenshot looks blank: %d distinct colours, %.1f %% non-white", colours, 100*ink)
	}
}

// TestRuleLabelsApart: labels of neighbouring sessions closer than a
// label's width go to the other row, labels far apart stay in the first,
// and all sit above the highest line (yhi).
func TestRuleLabelsApart(t *testing.T) {
	day := 86400.0
	xs := []float64{0, 5 * day, 60 * day, 62 * day, 64 * day}
	lb, err := ruleLabels(xs, []string{"1", "1,2", "5", "1", "2"}, 10, 8, 365*day)
	if err != nil {
		t.Fatal(err)
	}
	rows := make([]float64, len(lb.XYs))
	for i, p := range lb.XYs {
		rows[i] = p.Y
		if p.Y <= 8 || p.Y >= 10 {
			t.Errorf("label %d at y %g, outside the band (8, 10)", i, p.Y)
		}
	}
	for i := 1; i < len(rows); i++ {
		if xs[i]-xs[i-1] < 10*day && rows[i] == rows[i-1] {
			t.Errorf("labels %d and %d, %g days apart, share a row", i-1, i, (xs[i]-xs[i-1])/day)
		}
	}
	if rows[2] != rows[0] {
		t.Error("a label far from its neighbour left the first row")
	}
}

// TestHistoryChartLimit: a history of more series than MaxHistoryCharts is
// refused in one line before any file is written (a qa.json of 150,000
// vials once made 99,862 chart files).
func TestHistoryChartLimit(t *testing.T) {
	dir := t.TempDir()
	_, err := WriteHistory(dir, make([]*history.Series, MaxHistoryCharts+1), nil)
	if err == nil || !strings.Contains(err.Error(), "5001 vial series, above the limit of 5000 charts in one folder") {
		t.Errorf("err %v", err)
	}
	if e, _ := os.ReadDir(dir); len(e) != 0 {
		t.Errorf("wrote %d files", len(e))
	}
}
