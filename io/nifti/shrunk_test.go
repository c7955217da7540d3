//go:build linux || darwin || freebsd || netbsd || openbsd || dragonfly

package nifti

import (
	"os"
	"strings"
	"testing"
)

// TestSplitReadShrunkFile: a .nii.gz cut short while a split read has it
// mapped gives one error naming the file, not a crash and not samples.
func TestSplitReadShrunkFile(t *testing.T) {
	im := splitSeries(t)
	path := gzipWith(t, im, 6, nil)
	r, err := OpenSlabs(path, &SlabOptions{TempDir: t.TempDir()})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	r.SplitMemory = 1 << 30
	cut := false
	r.VolumeDone = func(i int, vol []float32) {
		if !cut {
			cut = true
			if err := os.Truncate(path, 8<<10); err != nil {
				t.Error(err)
			}
		}
	}
	d := r.Dims()
	err = r.ReadSlab(make([]float32, d[0]*d[1]*d[2]*d[3]), 0, d[2], nil)
	if err == nil {
		t.Fatal("read of a file cut short while it was read: no error")
	}
	if msg := err.Error(); !strings.HasPrefix(msg, path+": ") || strings.Contains(msg, "\n") {
		t.Fatalf("error %q: want one line starting with the path", msg)
	}
	t.Log(err)
}
