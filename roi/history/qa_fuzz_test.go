package history

import (
	"context"
	"path/filepath"
	"strings"
	"testing"
)

// FuzzParseQA feeds arbitrary bytes as a qa.json to ParseQA and, when it
// is accepted, adds it to a history database and analyses the record
// (seeded with the sessions TestBadFiles and the drift tests use;
// style.md). Nothing may panic; every error is one line starting with the
// name (or, from the database, the database path); adding the same bytes
// twice reports Already.
func FuzzParseQA(f *testing.F) {
	f.Add(session("2026-05-01 09:00", map[[2]string]float64{{"A1", "T1"}: 1, {"A2", "T2"}: -2}))
	f.Add(session("2024-01-08", map[[2]string]float64{{"A1", "T2"}: 0}))
	for _, s := range []string{
		`{"format":"tauvox-qa/0"}`,
		`not json`,
		`{"format":"tauvox-qa/1","session":{"scanner":"x","date":"yesterday","phantom":"p"},"vials":[{"id":"a"}]}`,
		`{"format":"tauvox-qa/1","session":{"scanner":"x","date":"2026-01-01","phantom":"p"}}`,
		`{"format":"tauvox-qa/1","session":{"scanner":"x","date":"2026-02-30","phantom":"p"},"vials":[{"id":"a","quantity":"T1","n":1e400}]}`,
		`{"format":"tauvox-qa/1","session":{"scanner":"<script>","date":"2026-01-01","time":"25:99","phantom":"../p"},"vials":[{"id":"a","quantity":"T1","median":"NaN"}]}`,
	} {
		f.Add([]byte(s))
	}
	db := filepath.Join(f.TempDir(), "fuzz.db")
	s, err := Open(db, nil)
	if err != nil {
		f.Fatal(err)
	}
	f.Cleanup(func() { s.Close() })
	ctx := context.Background()
	oneLine := func(t *testing.T, err error) {
		if m := err.Error(); !(strings.HasPrefix(m, "fuzz.json: ") || strings.HasPrefix(m, db)) || strings.ContainsAny(m, "\r\n") {
			t.Fatalf("bad error text %q", m)
		}
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		if _, err := ParseQA(data, "fuzz.json"); err != nil {
			oneLine(t, err)
			return
		}
		r, err := s.Add(ctx, data, "fuzz.json")
		if err != nil {
			oneLine(t, err)
			return
		}
		again, err := s.Add(ctx, data, "fuzz.json")
		if err != nil || !again.Already || again.ID != r.ID {
			t.Fatalf("second add: %+v %v, want Already with id %d", again, err, r.ID)
		}
		pts, err := s.Points(ctx, "")
		if err != nil {
			t.Fatal(err)
		}
		Analyse(pts, nil)
		if ok, err := s.Remove(ctx, r.ID); err != nil || !ok {
			t.Fatalf("remove %d: %v %v", r.ID, ok, err)
		}
	})
}
