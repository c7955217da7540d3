package history

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// FuzzOpen feeds arbitrary bytes as a history database file to Open (read
// only, then for writing) and reads every session and point from it. It is
// seeded with a real database holding two sessions (made with this
// package, then read back as bytes), an empty file, a database of another
// program, and ones whose schema version is negative or from the future
// (the −1 case panicked before). Nothing may panic; every error is one line
// starting with the database path.
func FuzzOpen(f *testing.F) {
	dir := f.TempDir()
	good := filepath.Join(dir, "seed.db")
	s, err := Open(good, nil)
	if err != nil {
		f.Fatal(err)
	}
	ctx := context.Background()
	for _, q := range [][]byte{
		session("2026-05-01 09:00", map[[2]string]float64{{"A1", "T1"}: 1, {"A2", "T2"}: -2}),
		session("2026-06-01 09:00", map[[2]string]float64{{"A1", "T1"}: 1.5, {"A2", "T2"}: -1}),
	} {
		if _, err := s.Add(ctx, q, "seed.json"); err != nil {
			f.Fatal(err)
		}
	}
	// Fold the write-ahead log into the file so that its bytes are the
	// whole database.
	if _, err := s.db.ExecContext(ctx, "PRAGMA wal_checkpoint(TRUNCATE)"); err != nil {
		f.Fatal(err)
	}
	s.Close()
	b, err := os.ReadFile(good)
	if err != nil {
		f.Fatal(err)
	}
	f.Add(b)
	f.Add([]byte{})
	f.Add([]byte("SQLite format 3\x00"))
	for _, v := range []int32{-1, 99} {
		c := append([]byte(nil), b...)
		// user_version: 4 bytes big-endian at offset 60 of the file header
		// (sqlite.org/fileformat.html §1.3.14).
		c[60], c[61], c[62], c[63] = byte(v>>24), byte(v>>16), byte(v>>8), byte(v)
		f.Add(c)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		path := filepath.Join(t.TempDir(), "h.db")
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		check := func(err error) {
			if err == nil {
				return
			}
			if m := err.Error(); !strings.HasPrefix(m, path) || strings.ContainsAny(m, "\r\n") {
				t.Fatalf("bad error text %q", m)
			}
		}
		for _, ro := range []bool{true, false} {
			st, err := Open(path, &Options{ReadOnly: ro})
			if err != nil {
				check(err)
				continue
			}
			_, err = st.Sessions(ctx, "")
			check(err)
			_, err = st.Points(ctx, "")
			check(err)
			st.Close()
		}
	})
}
