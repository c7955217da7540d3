package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"strings"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/internal/qarun"
	"github.com/tauvox/tauvox/internal/regular"
	"github.com/tauvox/tauvox/io/mapset"
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
beyond its tolerance by more than its uncertainty, or drifting into it
within the horizon), so a scheduled job can alert; --strict also for watch
items.`

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
	s, err := qarun.OpenDB(db, false)
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
	s, err := qarun.OpenDB(db, true)
	if err != nil {
		return err
	}
	defer s.Close()
	list, err := s.Sessions(ctx, scanner)
	if err != nil {
		return err
	}
	qarun.SessionTable(e.stdout, list)
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
	s, err := qarun.OpenDB(db, true)
	if err != nil {
		return err
	}
	defer s.Close()
	pts, err := s.Points(ctx, scanner)
	if err != nil {
		return err
	}
	csv := qarun.ExportCSV(pts)
	if out == "" {
		data := csv
		if isTerminal(e.stdout) {
			// Text from qa.json files never reaches a terminal raw; a
			// pipe or file gets the exact CSV.
			lines := strings.Split(string(csv), "\n")
			for i := range lines {
				lines[i] = output.Printable(lines[i])
			}
			data = []byte(strings.Join(lines, "\n"))
		}
		_, err := e.stdout.Write(data)
		return err
	}
	return output.WriteFile(out, csv)
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
	s, err := qarun.OpenDB(db, false)
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

// driftTable prints the per-vial drift summary, worst first.
func driftTable(e *env, ss []*history.Series) { qarun.DriftTable(e.stdout, ss) }
