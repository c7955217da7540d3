package dicom

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestSeriesSizeCap: a series larger than ScanOptions.MaxBytes is refused
// by LoadSeries before the samples are allocated, with an error that
// names the folder, the grid and the limit and wraps ErrTooLarge (an
// UnsupportedError, not a malformed file). The series (4×3×2 pixels, 3
// echoes: 72 samples, 288 bytes as float32) fits in 288 bytes and not in
// 287.
func TestSeriesSizeCap(t *testing.T) {
	dir := t.TempDir()
	for i, b := range fuzzSeriesFiles(t) {
		if err := os.WriteFile(filepath.Join(dir, fmt.Sprintf("f%d", i)), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	for _, c := range []struct {
		max int64
		ok  bool
	}{{288, true}, {287, false}} {
		cat, err := Scan([]string{dir}, &ScanOptions{MaxBytes: c.max})
		if err != nil || len(cat.Series) != 1 {
			t.Fatalf("scan: %v %d series", err, len(cat.Series))
		}
		im, err := LoadSeries(cat.Series[0])
		switch {
		case c.ok && err != nil:
			t.Errorf("MaxBytes %d: %v", c.max, err)
		case c.ok && len(im.Data) != 72:
			t.Errorf("MaxBytes %d: %d samples", c.max, len(im.Data))
		case !c.ok && (err == nil || !errors.Is(err, ErrTooLarge) || !strings.Contains(err.Error(), dir) || !strings.Contains(err.Error(), "287")):
			t.Errorf("MaxBytes %d: %v, want ErrTooLarge naming %s and the limit", c.max, err, dir)
		case !c.ok:
			var ue *UnsupportedError
			if !errors.As(err, &ue) {
				t.Errorf("MaxBytes %d: %T is not an UnsupportedError", c.max, err)
			}
			t.Logf("MaxBytes %d: %v", c.max, err)
		}
	}
}
