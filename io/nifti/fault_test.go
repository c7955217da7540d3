//go:build linux || darwin || freebsd || netbsd || openbsd || dragonfly

package nifti

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestGuardMappedFault: a mapped file that shrinks under its reader makes
// the reader fault (SIGBUS past the new end, POSIX mmap); guard turns that
// fault, and only that, into errChanged. A panic of any other kind goes on.
func TestGuardMappedFault(t *testing.T) {
	p := filepath.Join(t.TempDir(), "f.bin")
	if err := os.WriteFile(p, make([]byte, 256<<10), 0o644); err != nil {
		t.Fatal(err)
	}
	f, err := os.OpenFile(p, os.O_RDWR, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	mem, unmap, err := mapFile(f, 256<<10)
	if err != nil {
		t.Fatal(err)
	}
	defer unmap()
	var sum byte
	if err := guard(mem, func() { sum += mem[200<<10] }); err != nil {
		t.Fatalf("read of an intact mapping: %v", err)
	}
	if err := f.Truncate(4096); err != nil {
		t.Fatal(err)
	}
	if err := guard(mem, func() { sum += mem[200<<10] }); !errors.Is(err, errChanged) {
		t.Fatalf("read past the new end: got %v, want errChanged", err)
	}
	defer func() {
		if p := recover(); p == nil || !strings.Contains(p.(error).Error(), "index out of range") {
			t.Fatalf("a panic that is not a fault of the mapping: recovered %v", p)
		}
	}()
	var none []byte
	guard(mem, func() { sum += none[3] })
}

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
