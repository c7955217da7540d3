package dicom

import (
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// FuzzReadHeader feeds arbitrary bytes as a file to Scan and loads every
// series found, seeded with every file under testdata/dicom and the
// hand-made files of the broken-input table (style.md; as
// image/png/fuzz_test.go). Nothing may panic; every problem and error is
// one line starting with the path; a loaded image is self-consistent.
func FuzzReadHeader(f *testing.F) {
	filepath.WalkDir(testdata, func(p string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() && !strings.HasSuffix(p, ".json") && !strings.HasSuffix(p, ".txt") {
			if b, err := os.ReadFile(p); err == nil && len(b) < 1<<16 {
				f.Add(b)
			}
		}
		return nil
	})
	f.Add(fileWith(tsExplicitLE, nil))
	f.Add(fileWith(tsImplicitLE, nil))
	f.Add(fileWith(tsExplicitLE, func(d *dataset) { d.elems = append(d.elems, element{0x00081115, nested(3)}) }))
	dir := f.TempDir()
	path := filepath.Join(dir, "fuzz.dcm")
	f.Fuzz(func(t *testing.T, data []byte) {
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Skip(err)
		}
		c, err := Scan([]string{path}, &ScanOptions{MaxHeaderBytes: 1 << 20, MaxBytes: 1 << 24, Localizers: true, Derived: true})
		if err != nil {
			t.Fatal(err)
		}
		for _, p := range c.Problems {
			if s := p.String(); !strings.HasPrefix(s, dir) || strings.ContainsAny(s, "\r\n") {
				t.Fatalf("bad problem text %q", s)
			}
		}
		for _, s := range c.Series {
			im, err := LoadSeries(s)
			if err != nil {
				if m := err.Error(); !strings.HasPrefix(m, dir) || strings.ContainsAny(m, "\r\n") {
					t.Fatalf("bad error text %q", m)
				}
				continue
			}
			if err := im.Validate(); err != nil {
				t.Fatal(err)
			}
		}
	})
}
