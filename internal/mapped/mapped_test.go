//go:build linux || darwin || freebsd || netbsd || openbsd || dragonfly

package mapped

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestGuardMappedFault: a mapped file that shrinks under its reader makes
// the reader fault (SIGBUS past the new end, POSIX mmap); Guard turns that
// fault, and only that, into ErrChanged. A panic of any other kind goes on.
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
	mem, unmap, err := File(f, 256<<10)
	if err != nil {
		t.Fatal(err)
	}
	defer unmap()
	var sum byte
	if err := Guard(mem, func() { sum += mem[200<<10] }); err != nil {
		t.Fatalf("read of an intact mapping: %v", err)
	}
	if err := f.Truncate(4096); err != nil {
		t.Fatal(err)
	}
	if err := Guard(mem, func() { sum += mem[200<<10] }); !errors.Is(err, ErrChanged) {
		t.Fatalf("read past the new end: got %v, want ErrChanged", err)
	}
	defer func() {
		if p := recover(); p == nil || !strings.Contains(p.(error).Error(), "index out of range") {
			t.Fatalf("a panic that is not a fault of the mapping: recovered %v", p)
		}
	}()
	var none []byte
	Guard(mem, func() { sum += none[3] })
}

// TestRelease: pages of a mapping given back (Release) read again with
// the file's bytes, whatever range is asked for (unaligned ends, empty,
// outside).
func TestRelease(t *testing.T) {
	p := filepath.Join(t.TempDir(), "f.bin")
	want := make([]byte, 64<<10)
	for i := range want {
		want[i] = byte(i * 7)
	}
	if err := os.WriteFile(p, want, 0o644); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	mem, unmap, err := File(f, int64(len(want)))
	if err != nil {
		t.Skip("not mapped here:", err)
	}
	defer unmap()
	for _, r := range [][2]int{{0, 1 << 14}, {100, 40000}, {5000, 5000}, {-4, 10}, {60000, 1 << 20}, {0, len(want)}} {
		Release(mem, r[0], r[1])
		for i := range want {
			if mem[i] != want[i] {
				t.Fatalf("after Release(%d, %d): byte %d = %d, want %d", r[0], r[1], i, mem[i], want[i])
			}
		}
	}
}
