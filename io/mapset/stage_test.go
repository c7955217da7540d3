package mapset

import (
	"os"
	"path/filepath"
	"testing"
)

// TestSweep: a new stage removes an abandoned temporary folder of the same
// output (owner file present, lock free), keeps the folder of a stage
// still open in this process (lock held), and keeps a look-alike folder
// without an owner file. Commit leaves no owner file in the output.
func TestSweep(t *testing.T) {
	if f, _ := lockStage(t.TempDir()); f == nil {
		t.Skip("file locks unavailable here")
	} else {
		f.Close()
	}
	parent := t.TempDir()
	out := filepath.Join(parent, "maps")
	live, err := NewStage(out, false)
	if err != nil {
		t.Fatal(err)
	}
	dead := filepath.Join(parent, ".maps.tmp-dead")
	stranger := filepath.Join(parent, ".maps.tmp-other")
	for _, d := range []string{dead, stranger} {
		if err := os.Mkdir(d, 0o755); err != nil {
			t.Fatal(err)
		}
		os.WriteFile(filepath.Join(d, "T2map.nii.gz"), []byte("partial"), 0o644)
	}
	os.WriteFile(filepath.Join(dead, ownerFile), nil, 0o644) // nobody holds its lock
	next, err := NewStage(out, false)
	if err != nil {
		t.Fatal(err)
	}
	exists := func(p string) bool { _, err := os.Stat(p); return err == nil }
	if exists(dead) {
		t.Error("abandoned folder kept")
	}
	if !exists(live.tmp) {
		t.Error("folder of a living stage removed")
	}
	if !exists(stranger) {
		t.Error("folder without an owner file removed")
	}
	os.WriteFile(next.Path("a.txt"), []byte("x"), 0o644)
	if err := next.Commit(); err != nil {
		t.Fatal(err)
	}
	if exists(filepath.Join(out, ownerFile)) {
		t.Error("owner file left in the output")
	}
	if !exists(filepath.Join(out, "a.txt")) {
		t.Error("output missing")
	}
	live.Abort()
	if exists(live.tmp) {
		t.Error("Abort left the folder")
	}
}
