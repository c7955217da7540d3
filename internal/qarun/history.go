package qarun

import (
	"bytes"
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"sort"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/internal/report"
	"github.com/tauvox/tauvox/roi/history"
)

// OpenDB opens the history database at path (readOnly: it must exist and
// is not changed).
func OpenDB(path string, readOnly bool) (*history.Store, error) {
	if path == "" {
		return nil, errors.New("--db is required")
	}
	if readOnly {
		if _, err := os.Stat(path); err != nil {
			return nil, err
		}
	}
	return history.Open(path, &history.Options{ReadOnly: readOnly})
}

// ChartOptions are the settings of the stability charts as the command
// line gives them (the flags of tauvox history chart).
type ChartOptions struct {
	Baseline    int     // the first N sessions
	From, To    string  // or the sessions between these dates (YYYY-MM-DD)
	MinDrift    float64 // percentage points per year
	MinLimit    float64 // smallest ±3 SD half-width, percentage points (0: no user floor)
	MinSessions int
	Horizon     float64 // months
	// DriftConfidence is the percent confidence of the drift slope's
	// interval; 0 means history.DefaultDriftConfidence.
	DriftConfidence float64
}

// Settings checks the options and returns the statistics settings.
func (o *ChartOptions) Settings() (*history.Settings, error) {
	switch {
	case o.Baseline < 2:
		return nil, errors.New("--baseline must be at least 2 sessions")
	case o.MinSessions < 3:
		return nil, errors.New("--min-sessions must be at least 3")
	case !(o.MinLimit >= 0) || o.MinLimit > 100:
		return nil, errors.New("--min-limit must be 0…100 percentage points")
	case !(o.Horizon > 0) || o.Horizon > 120:
		return nil, errors.New("--horizon must be 0…120 months (more than 0)")
	case o.DriftConfidence != 0 && !(o.DriftConfidence >= 50 && o.DriftConfidence <= 99.99):
		return nil, errors.New("--drift-confidence must be 50…99.99 percent")
	}
	set := &history.Settings{Baseline: history.Baseline{N: o.Baseline}, MinDrift: o.MinDrift,
		MinLimit: o.MinLimit, MinSessions: o.MinSessions, Horizon: o.Horizon / 12, DriftConfidence: o.DriftConfidence / 100}
	if o.MinLimit == 0 {
		set.MinLimit = -1 // no user floor
	}
	if o.From != "" {
		f, err := time.Parse("2006-01-02", o.From)
		if err != nil {
			return nil, fmt.Errorf("--baseline-from %q: want YYYY-MM-DD", o.From)
		}
		set.Baseline.From = f
		if o.To != "" {
			t, err := time.Parse("2006-01-02", o.To)
			if err != nil {
				return nil, fmt.Errorf("--baseline-to %q: want YYYY-MM-DD", o.To)
			}
			set.Baseline.To = t.Add(24*time.Hour - time.Second)
		}
	}
	return set, nil
}

// Analyse reads every point of the database at db (of one scanner, when
// given) and computes the statistics of each series.
func Analyse(ctx context.Context, db, scanner string, set *history.Settings) ([]*history.Series, error) {
	s, err := OpenDB(db, true)
	if err != nil {
		return nil, err
	}
	defer s.Close()
	pts, err := s.Points(ctx, scanner)
	if err != nil {
		return nil, err
	}
	if len(pts) == 0 {
		return nil, fmt.Errorf("%s: no sessions recorded%s", db, map[bool]string{true: " for scanner " + scanner}[scanner != ""])
	}
	return history.Analyse(pts, set), nil
}

// WriteCharts writes the charts, index.html and drift.csv of ss into the
// folder dir (made when missing) and returns the summary; ctx ends the
// drawing between charts.
func WriteCharts(ctx context.Context, dir string, ss []*history.Series, set *history.Settings, source, tool string) (*report.HistorySummary, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	return report.WriteHistory(dir, ss, &report.HistoryOptions{Settings: set, Source: source, Tool: tool, Context: ctx})
}

// ExportCSV returns one CSV row per session × vial × quantity (times in
// ms, deviation in percent), the columns of docs/formats.md.
func ExportCSV(pts []history.Point) []byte {
	num := output.Num
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	w.Write([]string{"session", "scanner", "acquired", "field_T", "temperature_C", "vial", "quantity", "n", "mean_ms", "median_ms", "sd_ms", "reference_ms", "deviation_pct", "tolerance_ms", "verdict"})
	for _, p := range pts {
		w.Write([]string{strconv.FormatInt(p.SessionID, 10), p.Scanner, p.Acquired, num(p.Field, 2), num(p.Temperature, 2), p.Vial, p.Quantity,
			strconv.Itoa(p.N), num(p.Mean, 3), num(p.Median, 3), num(p.SD, 3), num(p.Reference, 3), num(p.Deviation, 4), num(p.Tolerance, 3), p.Verdict})
	}
	w.Flush()
	return b.Bytes()
}

// SessionTable writes the recorded sessions as a table, text from the
// files made printable.
func SessionTable(w io.Writer, list []history.SessionInfo) {
	cell := output.Cell
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "id\tscanner\tacquired\tphantom\tfield T\ttemp °C\tresults\tfailed\ttool")
	for _, si := range list {
		fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t%g\t%g\t%d\t%d\t%s\n", si.ID, cell(si.Scanner), cell(si.Acquired), cell(si.Phantom), si.Field, si.Temperature, si.Vials, si.Failed, cell(si.Tool))
	}
	tw.Flush()
	fmt.Fprintf(w, "%d sessions\n", len(list))
}

// findingOrder ranks findings for the drift table.
var findingOrder = map[string]int{history.FindingAction: 0, history.FindingWatch: 1, history.FindingTooFew: 2, history.FindingOK: 3}

// worstFirst orders series: by finding, then drifting first, then by the
// number of rules violated, then by the size of the slope.
func worstFirst(ss []*history.Series) []*history.Series {
	out := append([]*history.Series(nil), ss...)
	sort.SliceStable(out, func(i, j int) bool {
		a, b := out[i], out[j]
		if fa, fb := findingOrder[a.Finding], findingOrder[b.Finding]; fa != fb {
			return fa < fb
		}
		if a.Drifting != b.Drifting {
			return a.Drifting
		}
		if len(a.Violations) != len(b.Violations) {
			return len(a.Violations) > len(b.Violations)
		}
		return math.Abs(a.Slope) > math.Abs(b.Slope)
	})
	return out
}

// DriftTable writes the per-vial drift summary, worst first.
func DriftTable(w io.Writer, ss []*history.Series) {
	num, cell := output.Num, output.Cell
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "scanner\tvial\tq\tsessions\tbaseline %\tlast %\tdrift %/yr\t95% CI\tviolations\tfinding\t")
	for _, s := range worstFirst(ss) {
		var v []string
		for _, k := range s.Violations {
			v = append(v, strconv.Itoa(k))
		}
		f := s.Finding
		if f == history.FindingTooFew {
			f = fmt.Sprintf("not enough sessions (%d of %d)", s.Sessions, s.MinSessions)
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%d\t%s\t%s\t%s\t[%s, %s]\t%s\t%s\t\n", cell(s.Scanner), cell(s.Vial), cell(s.Quantity), len(s.Points),
			num(s.BaselineMean, 2), num(s.Value[len(s.Value)-1], 2), num(s.Slope, 2), num(s.SlopeLow, 2), num(s.SlopeHigh, 2), strings.Join(v, ";"), f)
	}
	tw.Flush()
}
