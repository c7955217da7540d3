package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"math"
	"os"
	"sort"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/tauvox/tauvox/internal/regular"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/roi/history"
)

const historySummary = `Keeps phantom QA sessions (qa.json from 'tauvox phantom') in one SQLite file
and shows each vial's stability:

  tauvox history add --db FILE QA.json...     record sessions (the same file twice changes nothing)
  tauvox history list --db FILE [--scanner S] sessions per scanner
  tauvox history export --db FILE --csv [--out FILE]
                                              one row per session × vial × quantity
  tauvox history remove --db FILE --id N --yes
                                              delete one mis-entered session
  tauvox history chart --db FILE [--scanner S] --out DIR
                                              control charts, index.html and drift.csv

Statistics use each vial's deviation from its temperature-corrected reference
(percent). 'chart' exits with code 1 when there is an action item (a vial
outside its tolerance, or drifting into it within the horizon), so a
scheduled job can alert; --strict also for watch items.`

func runHistory(ctx context.Context, args []string, e *env) error {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		fmt.Fprintln(e.stdout, "Usage: tauvox history SUBCOMMAND --db FILE [options]\n\n"+historySummary)
		if len(args) == 0 {
			return &exitError{code: 2, err: errors.New("give a subcommand: add, list, export, remove or chart")}
		}
		return errHelp
	}
	sub, rest := args[0], args[1:]
	switch sub {
	case "add":
		return historyAdd(ctx, rest, e)
	case "list":
		return historyList(ctx, rest, e)
	case "export":
		return historyExport(ctx, rest, e)
	case "remove":
		return historyRemove(ctx, rest, e)
	case "chart":
		return historyChart(ctx, rest, e)
	}
	return fmt.Errorf("unknown history subcommand %q (add, list, export, remove, chart)", sub)
}

func openDB(path string, readOnly bool) (*history.Store, error) {
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

func historyAdd(ctx context.Context, args []string, e *env) error {
	var db string
	fs := newFlags("history add", "--db FILE QA.json...", "Records each session; adding the same qa.json again changes nothing and says so.", e)
	fs.StringVar(&db, "db", "", "history database file (created when missing)")
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
		return err
	}
	if len(pos) == 0 {
		return errors.New("give at least one qa.json")
	}
	// Read and check every file before touching the database.
	data := make([][]byte, len(pos))
	for i, p := range pos {
		b, err := regular.ReadFile(p)
		if err != nil {
			return err
		}
		if _, err := history.ParseQA(b, p); err != nil {
			return err
		}
		data[i] = b
	}
	s, err := openDB(db, false)
	if err != nil {
		return err
	}
	defer s.Close()
	for i, p := range pos {
		r, err := s.Add(ctx, data[i], p)
		if err != nil {
			return err
		}
		if r.Already {
			fmt.Fprintf(e.stdout, "%s: already recorded as session %d; nothing changed\n", p, r.ID)
		} else {
			fmt.Fprintf(e.stdout, "%s: recorded as session %d\n", p, r.ID)
		}
	}
	return nil
}

func historyList(ctx context.Context, args []string, e *env) error {
	var db, scanner string
	fs := newFlags("history list", "--db FILE [--scanner S]", "Lists the recorded sessions per scanner, oldest first.", e)
	fs.StringVar(&db, "db", "", "history database file")
	fs.StringVar(&scanner, "scanner", "", "only this scanner")
	if err := parse(fs, args, nil); err != nil {
		return err
	}
	s, err := openDB(db, true)
	if err != nil {
		return err
	}
	defer s.Close()
	list, err := s.Sessions(ctx, scanner)
	if err != nil {
		return err
	}
	tw := tabwriter.NewWriter(e.stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "id\tscanner\tacquired\tphantom\tfield T\ttemp °C\tresults\tfailed\ttool")
	for _, si := range list {
		fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t%g\t%g\t%d\t%d\t%s\n", si.ID, oneLine(si.Scanner), oneLine(si.Acquired), oneLine(si.Phantom), si.Field, si.Temperature, si.Vials, si.Failed, oneLine(si.Tool))
	}
	tw.Flush()
	fmt.Fprintf(e.stdout, "%d sessions\n", len(list))
	return nil
}

func historyExport(ctx context.Context, args []string, e *env) error {
	var db, scanner, out string
	var asCSV, force bool
	fs := newFlags("history export", "--db FILE --csv [--out FILE] [--scanner S]", "Writes one CSV row per session × vial × quantity (times in ms, deviation in percent).", e)
	fs.StringVar(&db, "db", "", "history database file")
	fs.StringVar(&scanner, "scanner", "", "only this scanner")
	fs.BoolVar(&asCSV, "csv", true, "CSV output (the only format)")
	fs.StringVar(&out, "out", "", "output file (default: standard output; refused if it exists, see --force)")
	fs.BoolVar(&force, "force", false, "replace an existing output file")
	if err := parse(fs, args, nil); err != nil {
		return err
	}
	if out != "" {
		if err := checkOutput(out, db); err != nil {
			return err
		}
		if _, err := os.Stat(out); err == nil && !force {
			return fmt.Errorf("%s: %w", out, mapset.ErrExists)
		}
	}
	s, err := openDB(db, true)
	if err != nil {
		return err
	}
	defer s.Close()
	pts, err := s.Points(ctx, scanner)
	if err != nil {
		return err
	}
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	w.Write([]string{"session", "scanner", "acquired", "field_T", "temperature_C", "vial", "quantity", "n", "mean_ms", "median_ms", "sd_ms", "reference_ms", "deviation_pct", "tolerance_ms", "verdict"})
	for _, p := range pts {
		w.Write([]string{strconv.FormatInt(p.SessionID, 10), p.Scanner, p.Acquired, fmtNum(p.Field, 2), fmtNum(p.Temperature, 2), p.Vial, p.Quantity,
			strconv.Itoa(p.N), fmtNum(p.Mean, 3), fmtNum(p.Median, 3), fmtNum(p.SD, 3), fmtNum(p.Reference, 3), fmtNum(p.Deviation, 4), fmtNum(p.Tolerance, 3), p.Verdict})
	}
	w.Flush()
	if out == "" {
		data := b.Bytes()
		if isTerminal(e.stdout) {
			// Text from qa.json files never reaches a terminal raw; a
			// pipe or file gets the exact CSV.
			lines := strings.Split(b.String(), "\n")
			for i := range lines {
				lines[i] = printable(lines[i])
			}
			data = []byte(strings.Join(lines, "\n"))
		}
		_, err := e.stdout.Write(data)
		return err
	}
	return series.WriteFileAtomic(out, b.Bytes())
}

func historyRemove(ctx context.Context, args []string, e *env) error {
	var db string
	var id int64
	var yes bool
	fs := newFlags("history remove", "--db FILE --id N --yes", "Deletes one session and its results (see 'history list' for ids).", e)
	fs.StringVar(&db, "db", "", "history database file")
	fs.Int64Var(&id, "id", 0, "session id to delete")
	fs.BoolVar(&yes, "yes", false, "confirm the deletion")
	if err := parse(fs, args, nil); err != nil {
		return err
	}
	if id <= 0 {
		return errors.New("--id is required")
	}
	s, err := openDB(db, false)
	if err != nil {
		return err
	}
	defer s.Close()
	if !yes {
		return fmt.Errorf("removing session %d deletes its results; repeat with --yes to confirm", id)
	}
	ok, err := s.Remove(ctx, id)
	if err != nil {
		return err
	}
	if !ok {
		return fmt.Errorf("%s: no session %d", db, id)
	}
	fmt.Fprintf(e.stdout, "removed session %d\n", id)
	return nil
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

// driftTable prints the per-vial drift summary, worst first.
func driftTable(e *env, ss []*history.Series) {
	ss = worstFirst(ss)
	tw := tabwriter.NewWriter(e.stdout, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "scanner\tvial\tq\tsessions\tbaseline %\tlast %\tdrift %/yr\t95% CI\tviolations\tfinding\t")
	for _, s := range ss {
		var v []string
		for _, k := range s.Violations {
			v = append(v, strconv.Itoa(k))
		}
		f := s.Finding
		if f == history.FindingTooFew {
			f = fmt.Sprintf("not enough sessions (%d of %d)", s.Sessions, s.MinSessions)
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%d\t%s\t%s\t%s\t[%s, %s]\t%s\t%s\t\n", oneLine(s.Scanner), oneLine(s.Vial), oneLine(s.Quantity), len(s.Points),
			fmtNum(s.BaselineMean, 2), fmtNum(s.Value[len(s.Value)-1], 2), fmtNum(s.Slope, 2), fmtNum(s.SlopeLow, 2), fmtNum(s.SlopeHigh, 2), strings.Join(v, ";"), f)
	}
	tw.Flush()
}
