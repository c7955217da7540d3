package dicom

import (
	"fmt"
	"math/rand"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"unicode"
	"unicode/utf8"

	"github.com/tauvox/tauvox/volume"
)

// fuzzSeriesFiles returns the files of a small valid multi-echo series
// (4×3 pixels, 2 slices, 3 echoes: 6 files) written by WriteSeries, in a
// fixed order.
func fuzzSeriesFiles(tb testing.TB) [][]byte {
	im := volume.New(4, 3, 2, 3)
	for i := range im.Data {
		im.Data[i] = float32(100 + i)
	}
	im.Acq = make([]volume.Acquisition, 3)
	for t := range im.Acq {
		im.Acq[t] = volume.Acquisition{EchoTime: float64(10 * (t + 1)), RepetitionTime: 2000, FlipAngle: 90}
		im.Acq[t].InversionTime = volume.Unknown().InversionTime
	}
	dir := tb.TempDir()
	if err := WriteSeries(dir, im, &WriteOptions{Rand: rand.New(rand.NewSource(1))}); err != nil {
		tb.Fatal(err)
	}
	names, _ := filepath.Glob(filepath.Join(dir, "*"))
	sort.Strings(names)
	var files [][]byte
	for _, p := range names {
		b, err := os.ReadFile(p)
		if err != nil {
			tb.Fatal(err)
		}
		files = append(files, b)
	}
	if len(files) != 6 {
		tb.Fatalf("wrote %d files, want 6", len(files))
	}
	return files
}

// FuzzSeries fuzzes discovery and series assembly: one file of an
// otherwise valid six-file series (written by WriteSeries) is replaced by
// the fuzzer's bytes (which file: index mod 6), the folder is scanned and
// every series found is loaded. Seeded with each file of the series at
// each position and the files of the committed broken series
// (testdata/dicom/broken, pydicom-written). The mutated file then has to
// agree or disagree with five good neighbours on matrix, geometry,
// spacing, echo times and identity, which a single-file target never
// reaches. Nothing may panic; problems and errors are one line starting
// with the folder; a loaded image is self-consistent.
func FuzzSeries(f *testing.F) {
	files := fuzzSeriesFiles(f)
	for i, b := range files {
		f.Add(b, uint8(i))
	}
	broken, _ := filepath.Glob(filepath.Join(testdata, "broken", "*", "*"))
	for i, p := range broken {
		if b, err := os.ReadFile(p); err == nil && len(b) < 1<<16 {
			f.Add(b, uint8(i))
		}
	}
	// A duplicate of a neighbour (same SOP instance, same position).
	f.Add(files[0], uint8(1))
	dir := filepath.Join(f.TempDir(), "series")
	if err := os.Mkdir(dir, 0o755); err != nil {
		f.Fatal(err)
	}
	for i, b := range files {
		if err := os.WriteFile(filepath.Join(dir, fmt.Sprintf("f%d", i)), b, 0o644); err != nil {
			f.Fatal(err)
		}
	}
	opt := &ScanOptions{MaxHeaderBytes: 1 << 20, MaxBytes: 1 << 24, Localizers: true, Derived: true}
	f.Fuzz(func(t *testing.T, data []byte, idx uint8) {
		k := int(idx) % len(files)
		p := filepath.Join(dir, fmt.Sprintf("f%d", k))
		if err := os.WriteFile(p, data, 0o644); err != nil {
			t.Skip(err)
		}
		defer os.WriteFile(p, files[k], 0o644)
		c, err := Scan([]string{dir}, opt)
		if err != nil {
			t.Fatal(err)
		}
		for _, pr := range c.Problems {
			if s := pr.String(); !strings.HasPrefix(s, dir) || strings.ContainsAny(s, "\r\n") {
				t.Fatalf("bad problem text %q", s)
			}
		}
		for _, s := range c.Series {
			if strings.ContainsAny(s.ID, "/\\\x00") || strings.Contains(s.ID, "..") {
				t.Fatalf("series id %q is not safe in a file name", s.ID)
			}
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
			for _, r := range im.Source.Description + im.Source.Scanner {
				if unicode.IsControl(r) {
					t.Fatalf("control character %U in source strings %+v", r, im.Source)
				}
			}
			if utf8.RuneCountInString(im.Source.Description) > maxText+1 {
				t.Fatalf("description of %d characters", utf8.RuneCountInString(im.Source.Description))
			}
		}
	})
}
