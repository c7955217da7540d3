package report

import (
	"context"
	_ "embed"
	"encoding/csv"
	"fmt"
	"html/template"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"
	"unicode"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/roi/history"
)

// File names WriteHistory writes beside the charts.
const (
	HistoryIndex = "index.html"
	HistoryCSV   = "drift.csv"
)

// HistoryColumns is the header of drift.csv, in order.
// The first ten are those of earlier versions; later ones are added at
// the end only: finding (action, watch, ok, too-few), last_mode (how the
// last session was judged: leave-one-out, fixed-baseline, too-few),
// modes (one letter per session, oldest first: L leave-one-out, F fixed
// baseline, T too few sessions, - no value),
// limit_sd_floor (the smallest SD the rules used, percentage points),
// tolerance_pct (the last session's tolerance in percent of the
// reference) and reasons (the finding's reasons joined by "; ").
var HistoryColumns = []string{"scanner", "vial", "quantity", "sessions", "baseline_mean", "last_value", "slope_pct_per_year", "slope_ci_low", "slope_ci_high", "violations",
	"finding", "last_mode", "modes", "limit_sd_floor", "tolerance_pct", "reasons"}

// HistoryOptions are the settings of WriteHistory; the zero value is
// right.
type HistoryOptions struct {
	// Settings are the statistics settings the series were analysed with
	// (history.Analyse). They are only described on the page (baseline,
	// EWMA λ and L, the drift threshold); nil means the defaults of
	// history.Settings.
	Settings *history.Settings
	// Source names the record the series come from (for example the
	// database's file name), shown under the title; empty shows nothing.
	Source string
	// Tool is the program name and version shown in the footer; empty
	// means "tauvox".
	Tool string
	// Context, when set, is checked before each chart is drawn: a
	// cancelled context (Ctrl-C) ends the writing with its error.
	Context context.Context
}

// MaxHistoryCharts bounds the charts one WriteHistory call draws (one per
// scanner × vial × quantity): a history with more series is refused
// before anything is written (a session holds at most qa.MaxVials
// results; chart one scanner at a time beyond that).
const MaxHistoryCharts = 5000

// HistoryRow is one scanner × vial × quantity of the summary.
type HistoryRow struct {
	Series *history.Series
	// Sessions counts the points with a finite value (those the
	// statistics use).
	Sessions int
	// Last is the value of the last such point, LastTime its date; NaN
	// and the zero time when there is none.
	Last     float64
	LastTime time.Time
	// Chart is the file name of the row's chart in the output folder;
	// empty when the series has no dated finite value to draw.
	Chart string
}

// HistorySummary is what WriteHistory wrote.
type HistorySummary struct {
	// Rows are the series, worst first: drifting ones first, then by
	// number of rules violated, then by |slope| (NaN last), then by
	// scanner, vial and quantity.
	Rows []HistoryRow
	// Violations is set when some row violates at least one rule.
	Violations bool
	// Actions, Watches and TooFew count the rows of each finding
	// (history.FindingAction, ...); the command exits 1 when Actions > 0
	// (or Watches > 0 with --strict).
	Actions, Watches, TooFew int
	// Scanners are the distinct scanner names, sorted.
	Scanners []string
	// From and To are the first and last session dates; zero when no
	// point has a date.
	From, To time.Time
}

//go:embed history.html.tmpl
var historyTemplate string

var historyTmpl = template.Must(template.New("history").Parse(historyTemplate))

// WriteHistory writes the stability charts of series into the existing
// folder dir: one SVG chart per series (named from its scanner, vial and
// quantity, sanitised, e.g. MR-3_A1_T1.svg), drift.csv (columns
// HistoryColumns, worst first) and index.html (a self-contained page with
// the table and every chart inline). Files of those names already in dir
// are replaced; each is written under a temporary name and renamed when
// complete. Nil opt means the zero HistoryOptions.
//
// It returns an error naming the file or the series when a series is
// malformed (nil, or per-point slices whose lengths do not match its
// points) or when writing fails.
func WriteHistory(dir string, series []*history.Series, opt *HistoryOptions) (*HistorySummary, error) {
	if opt == nil {
		opt = &HistoryOptions{}
	}
	if err := historyDirOK(dir); err != nil {
		return nil, err
	}
	if len(series) > MaxHistoryCharts {
		return nil, fmt.Errorf("report: history: %d vial series, above the limit of %d charts in one folder; chart one scanner at a time (--scanner)", len(series), MaxHistoryCharts)
	}
	for i, s := range series {
		if err := checkSeries(s); err != nil {
			return nil, fmt.Errorf("report: history: series %d: %w", i, err)
		}
	}
	sum := summarise(series)
	names := newNamer()
	charts := make([][]byte, len(sum.Rows))
	for i := range sum.Rows {
		if opt.Context != nil {
			if err := opt.Context.Err(); err != nil {
				return nil, err
			}
		}
		r := &sum.Rows[i]
		svg, err := historySVG(r.Series, opt.Settings)
		if err != nil {
			return nil, fmt.Errorf("report: history chart of %s: %w", seriesLabel(r.Series), err)
		}
		if svg == nil {
			continue
		}
		r.Chart = names.name(r.Series)
		charts[i] = svg
		path := filepath.Join(dir, r.Chart)
		if err := writeAtomic(path, func(w io.Writer) error { _, err := w.Write(svg); return err }); err != nil {
			return nil, err
		}
	}
	if err := writeAtomic(filepath.Join(dir, HistoryCSV), func(w io.Writer) error { return writeDriftCSV(w, sum.Rows) }); err != nil {
		return nil, err
	}
	d := historyPage(sum, charts, opt)
	if err := writeAtomic(filepath.Join(dir, HistoryIndex), func(w io.Writer) error { return historyTmpl.Execute(w, d) }); err != nil {
		return nil, err
	}
	return sum, nil
}

// checkSeries reports a series whose per-point slices do not match its
// points. Value must have one entry per point; the other slices may also
// be nil (absent).
func checkSeries(s *history.Series) error {
	if s == nil {
		return fmt.Errorf("nil series")
	}
	n := len(s.Points)
	if len(s.Value) != n {
		return fmt.Errorf("%s: %d values for %d points", seriesLabel(s), len(s.Value), n)
	}
	for _, f := range []struct {
		name string
		len  int
	}{
		{"rules", len(s.Rules)}, {"baseline marks", len(s.InBaseline)}, {"EWMA", len(s.EWMA)},
		{"EWMA lower limits", len(s.EWMALow)}, {"EWMA upper limits", len(s.EWMAHigh)}, {"EWMA marks", len(s.EWMAOut)},
	} {
		if f.len != 0 && f.len != n {
			return fmt.Errorf("%s: %d %s for %d points", seriesLabel(s), f.len, f.name, n)
		}
	}
	return nil
}

// seriesLabel names a series in errors, its strings quoted.
func seriesLabel(s *history.Series) string {
	return fmt.Sprintf("scanner %q vial %q quantity %q", s.Scanner, s.Vial, s.Quantity)
}

func summarise(series []*history.Series) *HistorySummary {
	sum := &HistorySummary{}
	scanners := map[string]bool{}
	for _, s := range series {
		r := HistoryRow{Series: s, Last: math.NaN()}
		for i, v := range s.Value {
			if finite(v) {
				r.Sessions++
				r.Last, r.LastTime = v, s.Points[i].Time
			}
			if t := s.Points[i].Time; !t.IsZero() {
				if sum.From.IsZero() || t.Before(sum.From) {
					sum.From = t
				}
				if t.After(sum.To) {
					sum.To = t
				}
			}
		}
		if len(s.Violations) > 0 {
			sum.Violations = true
		}
		switch s.Finding {
		case history.FindingAction:
			sum.Actions++
		case history.FindingWatch:
			sum.Watches++
		case history.FindingTooFew:
			sum.TooFew++
		}
		if !scanners[s.Scanner] {
			scanners[s.Scanner] = true
			sum.Scanners = append(sum.Scanners, s.Scanner)
		}
		sum.Rows = append(sum.Rows, r)
	}
	sort.Strings(sum.Scanners)
	sort.SliceStable(sum.Rows, func(i, j int) bool { return worse(sum.Rows[i].Series, sum.Rows[j].Series) })
	return sum
}

// findingRank orders findings: action, watch, too few, in control.
func findingRank(f string) int {
	switch f {
	case history.FindingAction:
		return 0
	case history.FindingWatch:
		return 1
	case history.FindingTooFew:
		return 2
	}
	return 3
}

// worse orders series worst first: by finding (action, watch, too few,
// in control), then drifting, then more rules violated, then larger
// |slope| (NaN last), then by name.
func worse(a, b *history.Series) bool {
	if ra, rb := findingRank(a.Finding), findingRank(b.Finding); ra != rb {
		return ra < rb
	}
	if a.Drifting != b.Drifting {
		return a.Drifting
	}
	if len(a.Violations) != len(b.Violations) {
		return len(a.Violations) > len(b.Violations)
	}
	sa, sb := math.Abs(a.Slope), math.Abs(b.Slope)
	switch {
	case math.IsNaN(sa) && !math.IsNaN(sb):
		return false
	case !math.IsNaN(sa) && math.IsNaN(sb):
		return true
	case sa != sb && !math.IsNaN(sa):
		return sa > sb
	}
	if a.Scanner != b.Scanner {
		return a.Scanner < b.Scanner
	}
	if a.Vial != b.Vial {
		return a.Vial < b.Vial
	}
	return a.Quantity < b.Quantity
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// csvNum formats v with 4 decimals (a ten-thousandth of a percentage
// point), or empty when not finite.
func csvNum(v float64) string {
	if !finite(v) {
		return ""
	}
	s := strconv.FormatFloat(v, 'f', 4, 64)
	if s == "-0.0000" {
		s = "0.0000"
	}
	return s
}

func ruleList(r []int, sep string) string {
	s := make([]string, len(r))
	for i, k := range r {
		s[i] = strconv.Itoa(k)
	}
	return strings.Join(s, sep)
}

// writeDriftCSV writes drift.csv: the header HistoryColumns and one row
// per series; the names as they are (encoding/csv quotes what needs it).
func writeDriftCSV(w io.Writer, rows []HistoryRow) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(HistoryColumns); err != nil {
		return err
	}
	for _, r := range rows {
		s := r.Series
		if err := cw.Write([]string{
			s.Scanner, s.Vial, s.Quantity, strconv.Itoa(r.Sessions),
			csvNum(s.BaselineMean), csvNum(r.Last),
			csvNum(s.Slope), csvNum(s.SlopeLow), csvNum(s.SlopeHigh),
			ruleList(s.Violations, ";"),
			s.Finding, lastMode(s), modeLetters(s.Mode), csvNum(s.Floor), csvNum(lastFinite(s.TolPct, s.Value)),
			strings.Join(s.Reasons, "; "),
		}); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// modeLetters writes one letter per session's mode (HistoryColumns).
func modeLetters(m []string) string {
	b := make([]byte, len(m))
	for i, x := range m {
		switch x {
		case history.ModeLeaveOneOut:
			b[i] = 'L'
		case history.ModeFixed:
			b[i] = 'F'
		case history.ModeTooFew:
			b[i] = 'T'
		default:
			b[i] = '-'
		}
	}
	return string(b)
}

// lastMode is the mode of the last session with a value.
func lastMode(s *history.Series) string {
	for i := len(s.Value) - 1; i >= 0; i-- {
		if finite(s.Value[i]) && i < len(s.Mode) {
			return s.Mode[i]
		}
	}
	return ""
}

// lastFinite is v at the last index where ref is finite.
func lastFinite(v, ref []float64) float64 {
	for i := len(ref) - 1; i >= 0; i-- {
		if finite(ref[i]) && i < len(v) {
			return v[i]
		}
	}
	return math.NaN()
}

// maxComponent bounds each of the three parts of a chart's file name, in
// bytes, so a name stays far below the 255-byte limit of common file
// systems.
const maxComponent = 48

// safeComponent turns a name taken from a file into a part of a file
// name: ASCII letters, digits, '-', '+' and '.' are kept, every other run
// of characters (separators, spaces, '_', control characters, non-ASCII)
// becomes one '_', no two dots follow each other, leading and trailing
// '.', '_' and '-' are dropped (no "..", no hidden file, no option-like
// name), and the result is cut to maxComponent bytes; empty becomes
// "unnamed".
func safeComponent(s string) string {
	var b strings.Builder
	under, dot := false, false
	for _, r := range s {
		ok := r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || r == '-' || r == '+' || r == '.'
		switch {
		case !ok:
			if !under {
				b.WriteByte('_')
			}
			under, dot = true, false
		case r == '.' && dot:
		default:
			b.WriteRune(r)
			under, dot = false, r == '.'
		}
		if b.Len() > 4*maxComponent {
			break
		}
	}
	out := strings.Trim(b.String(), "._-")
	if len(out) > maxComponent {
		out = strings.Trim(out[:maxComponent], "._-")
	}
	if out == "" {
		return "unnamed"
	}
	return out
}

// namer hands out distinct chart file names, distinct also on
// case-insensitive file systems.
type namer map[string]bool

func newNamer() namer { return namer{} }

func (n namer) name(s *history.Series) string {
	base := safeComponent(s.Scanner) + "_" + safeComponent(s.Vial) + "_" + safeComponent(s.Quantity)
	name := base + ".svg"
	for k := 2; n[strings.ToLower(name)]; k++ {
		name = fmt.Sprintf("%s-%d.svg", base, k)
	}
	n[strings.ToLower(name)] = true
	return name
}

// maxDisplay bounds a name shown on the page, in characters.
const maxDisplay = 80

// display prepares a name taken from a file for showing (html/template
// or the chart's SVG still escape it): invalid UTF-8 and control or
// format characters (which XML forbids or which reorder text) become
// U+FFFD, and the name is cut to max characters with an ellipsis.
func display(s string, max int) string {
	if strings.TrimSpace(s) == "" {
		return "–"
	}
	var b strings.Builder
	n := 0
	for _, r := range s { // invalid UTF-8 comes as utf8.RuneError, U+FFFD
		if n == max {
			b.WriteString("…")
			break
		}
		if unicode.IsControl(r) || unicode.Is(unicode.Cf, r) || r == 0xFFFE || r == 0xFFFF {
			r = unicode.ReplacementChar
		}
		b.WriteRune(r)
		n++
	}
	return b.String()
}

// The page's data, every value already text; names from files stay
// plain strings for html/template to escape.
type historyData struct {
	Title, Scanners, Range, Source string
	Count, Flagged                 string
	Class                          string // action, watch, ok or too-few: the summary's look
	Any                            bool
	Glance                         []glanceData
	Floor, Horizon, MinSessions    string
	Rules                          string
	Baseline, EWMA, Drift          string
	DriftCI                        string // the drift interval's confidence, percent
	Relative                       bool
	Rows                           []historyRowData
	Caution, Tool                  string
}

// glanceData is one vial of the at-a-glance strip: its quantities'
// sparklines.
type glanceData struct {
	Scanner, Vial string
	Lines         []sparkData
}

type sparkData struct {
	Anchor, Quantity, Finding string
	Spark                     template.URL
}

type historyRowData struct {
	Anchor                            string
	Finding, FindingClass             string
	Reasons, LastMode                 string
	Spark                             template.URL
	Scanner, Vial, Quantity, Relative string
	Sessions, Baseline, Last          string
	Slope, CI, Rules                  string
	Drifting, Flagged                 bool
	Chart                             template.URL
	File                              string
}

func historyPage(sum *HistorySummary, charts [][]byte, opt *HistoryOptions) *historyData {
	set := opt.Settings
	if set == nil {
		set = &history.Settings{}
	}
	lam, L, minDrift := set.Lambda, set.L, set.MinDrift
	if lam == 0 {
		lam = 0.2
	}
	if L == 0 {
		L = 3
	}
	if minDrift == 0 {
		minDrift = 1
	}
	d := &historyData{
		DriftCI: strconv.FormatFloat(100*set.DriftLevel(), 'f', -1, 64),
		Source:  opt.Source,
		Caution: output.Caution,
		Tool:    opt.Tool,
		Range:   "no dated sessions",
		EWMA:    fmt.Sprintf("λ = %g, limits ±%g SD·√(λ/(2−λ)·[1 − (1−λ)^(2i)])", lam, L),
		Drift:   fmt.Sprintf("%g", minDrift),
	}
	d.Baseline = baselineText(set.Baseline)
	if d.Tool == "" {
		d.Tool = "tauvox"
	}
	var sc []string
	for i, s := range sum.Scanners {
		if i == 4 {
			sc = append(sc, fmt.Sprintf("… (%d scanners)", len(sum.Scanners)))
			break
		}
		sc = append(sc, display(s, maxDisplay))
	}
	d.Scanners = strings.Join(sc, ", ")
	if len(sc) == 0 {
		d.Scanners = "no scanner"
	}
	if !sum.From.IsZero() {
		d.Range = sum.From.Format("2006-01-02") + " to " + sum.To.Format("2006-01-02")
	}
	d.Title = "Stability history: " + d.Scanners + ", " + d.Range
	flagged := 0
	for i, r := range sum.Rows {
		s := r.Series
		rd := historyRowData{
			Anchor:       fmt.Sprintf("c%d", i+1),
			Scanner:      display(s.Scanner, maxDisplay),
			Vial:         display(s.Vial, maxDisplay),
			Quantity:     display(s.Quantity, maxDisplay),
			Sessions:     strconv.Itoa(r.Sessions),
			Baseline:     signed(s.BaselineMean) + " ± " + num(s.BaselineSD, 2, "") + fmt.Sprintf(" (n = %d)", s.BaselineN),
			Last:         signed(r.Last),
			Slope:        signed(s.Slope),
			CI:           "–",
			Rules:        ruleList(s.Violations, ", "),
			Drifting:     s.Drifting,
			Flagged:      len(s.Violations) > 0,
			File:         r.Chart,
			Finding:      findingText(s),
			FindingClass: s.Finding,
			Reasons:      strings.Join(s.Reasons, "; "),
			LastMode:     lastMode(s),
			Spark:        dataURI("image/svg+xml", sparkline(s)),
		}
		if !finite(s.BaselineMean) {
			rd.Baseline = "–"
		}
		if finite(s.SlopeLow) && finite(s.SlopeHigh) {
			rd.CI = "[" + signed(s.SlopeLow) + ", " + signed(s.SlopeHigh) + "]"
		}
		if rd.Rules == "" {
			rd.Rules = "none"
		}
		if s.Relative {
			rd.Relative = "†"
			d.Relative = true
		}
		if charts[i] != nil {
			rd.Chart = dataURI("image/svg+xml", charts[i])
		}
		if rd.Flagged {
			flagged++
		}
		d.Rows = append(d.Rows, rd)
	}
	d.Any = flagged > 0
	d.Count = fmt.Sprintf("%d vial × quantity series", len(sum.Rows))
	d.Flagged, d.Class = headline(sum)
	d.Glance = glance(d.Rows, sum)
	minLimit := set.MinLimit
	if minLimit == 0 {
		minLimit = history.DefaultMinLimit
	}
	d.Floor = fmt.Sprintf("±%g %% for ±3 SD (SD ≥ %.2g %%)", math.Max(minLimit, 0), math.Max(minLimit, 0)/3)
	h := set.Horizon
	if h == 0 {
		h = history.DefaultHorizon
	}
	d.Horizon = fmt.Sprintf("%g year", h)
	if h != 1 {
		d.Horizon += "s"
	}
	ms := set.MinSessions
	if ms == 0 {
		ms = history.DefaultMinSessions
	}
	d.MinSessions = fmt.Sprint(max(3, ms))
	rules := set.Rules
	if rules == nil {
		rules = history.DefaultRules
	}
	d.Rules = ruleList(rules, ", ")
	return d
}

// findingText is the table's word for a series' finding.
func findingText(s *history.Series) string {
	switch s.Finding {
	case history.FindingAction:
		return "ACTION"
	case history.FindingWatch:
		return "watch"
	case history.FindingTooFew:
		return fmt.Sprintf("not enough sessions (%d of %d)", s.Sessions, s.MinSessions)
	case history.FindingOK:
		return "in control"
	}
	return "–"
}

// HistoryFlags returns, for Page.History, the first reason of every
// series whose finding is action or watch, keyed by HistoryKey(vial,
// quantity) (the series of one scanner).
func HistoryFlags(series []*history.Series) map[string]string {
	out := map[string]string{}
	for _, s := range series {
		if (s.Finding == history.FindingAction || s.Finding == history.FindingWatch) && len(s.Reasons) > 0 {
			out[HistoryKey(s.Vial, s.Quantity)] = s.Reasons[0]
		}
	}
	return out
}

// HistoryHeadline is the one-line summary leading the index page: the
// action items (vial, quantity, first reason), the watch items, how many
// series are in control and how many have too few sessions.
func HistoryHeadline(sum *HistorySummary) string {
	h, _ := headline(sum)
	return h
}

// headline is the one-line summary leading the page and its class.
func headline(sum *HistorySummary) (string, string) {
	var act, watch []string
	for _, r := range sum.Rows {
		s := r.Series
		name := display(s.Vial, 24) + " " + display(s.Quantity, 12)
		if len(sum.Scanners) > 1 {
			name = display(s.Scanner, 24) + " " + name
		}
		why := ""
		if len(s.Reasons) > 0 {
			why = " (" + s.Reasons[0] + ")"
		}
		switch s.Finding {
		case history.FindingAction:
			act = append(act, name+why)
		case history.FindingWatch:
			watch = append(watch, name+why)
		}
	}
	n := len(sum.Rows)
	ok := n - sum.Actions - sum.Watches - sum.TooFew
	var parts []string
	if len(act) > 0 {
		parts = append(parts, "Action: "+strings.Join(act, "; ")+".")
	}
	if len(watch) > 0 {
		if len(watch) > 4 {
			watch = append(watch[:4], fmt.Sprintf("and %d more", len(watch)-4))
		}
		parts = append(parts, "Watch: "+strings.Join(watch, "; ")+".")
	}
	if ok > 0 {
		parts = append(parts, fmt.Sprintf("%d of %d series in control.", ok, n))
	}
	if sum.TooFew > 0 {
		most := 0
		need := 0
		for _, r := range sum.Rows {
			if r.Series.Finding == history.FindingTooFew {
				most, need = max(most, r.Series.Sessions), r.Series.MinSessions
			}
		}
		parts = append(parts, fmt.Sprintf("%d of %d series not judged: not enough sessions (%d of %d).", sum.TooFew, n, most, need))
	}
	if n == 0 {
		return "No sessions recorded: nothing judged.", history.FindingTooFew
	}
	class := history.FindingOK
	switch {
	case len(act) > 0:
		class = history.FindingAction
	case len(watch) > 0:
		class = history.FindingWatch
	case sum.TooFew > 0:
		class = history.FindingTooFew
	}
	return strings.Join(parts, " "), class
}

// glance groups the rows' sparklines by scanner and vial, in name order.
func glance(rows []historyRowData, sum *HistorySummary) []glanceData {
	idx := make([]int, len(rows))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool {
		sa, sb := sum.Rows[idx[a]].Series, sum.Rows[idx[b]].Series
		if sa.Scanner != sb.Scanner {
			return sa.Scanner < sb.Scanner
		}
		if sa.Vial != sb.Vial {
			return sa.Vial < sb.Vial
		}
		return sa.Quantity < sb.Quantity
	})
	var out []glanceData
	for _, i := range idx {
		s, r := sum.Rows[i].Series, rows[i]
		if len(out) == 0 || out[len(out)-1].Scanner != r.Scanner || out[len(out)-1].Vial != r.Vial {
			out = append(out, glanceData{Scanner: r.Scanner, Vial: r.Vial})
		}
		g := &out[len(out)-1]
		g.Lines = append(g.Lines, sparkData{Anchor: r.Anchor, Quantity: r.Quantity, Finding: s.Finding, Spark: r.Spark})
	}
	return out
}

func baselineText(b history.Baseline) string {
	if !b.From.IsZero() {
		if b.To.IsZero() {
			return "the sessions from " + b.From.Format("2006-01-02") + " on"
		}
		return "the sessions from " + b.From.Format("2006-01-02") + " to " + b.To.Format("2006-01-02")
	}
	n := b.N
	if n == 0 {
		n = history.DefaultBaseline
	}
	return fmt.Sprintf("the first %d sessions", n)
}

// signed formats a percentage with 2 decimals and a sign (U+2212 for
// minus), or "–" when not finite.
func signed(v float64) string {
	if !finite(v) {
		return "–"
	}
	s := fmt.Sprintf("%+.2f", v)
	if s == "-0.00" {
		s = "+0.00"
	}
	return strings.Replace(s, "-", "−", 1)
}

// historyDirOK reports whether dir is an existing folder, for a clear
// error before any chart is drawn.
func historyDirOK(dir string) error {
	fi, err := os.Stat(dir)
	if err != nil {
		return fmt.Errorf("report: history: %w", err)
	}
	if !fi.IsDir() {
		return fmt.Errorf("%s: not a folder", dir)
	}
	return nil
}
