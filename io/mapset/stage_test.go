package mapset

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestSweep: a new stage removes an abandoned temporary folder of the same
// output (owner file present, lock free), keeps the folder of a stage
// still open in this process (lock held), and keeps a look-alike folder
// without an owner file. Commit leaves no owner file in the output.
func TestSweep(t *testing.T) {
	needLocks(t)
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

// TestCommitRaces: the target is checked again at Commit. A folder that
// appeared while the stage was built, a folder replaced by another, an
// empty folder written into, all give ErrChanged and are left exactly as
// they are; an empty folder found at the start is accepted and filled.
func TestCommitRaces(t *testing.T) {
	exists := func(p string) bool { _, err := os.Stat(p); return err == nil }
	put := func(dir, name, s string) {
		t.Helper()
		if err := os.MkdirAll(dir, 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, name), []byte(s), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	read := func(p string) string { b, _ := os.ReadFile(p); return string(b) }
	for _, tc := range []struct {
		name    string
		before  func(out string) // the target before NewStage
		force   bool
		during  func(out string) // what happens while the stage is built
		changed bool
		keep    string // file that must survive in out, with content "theirs"
	}{
		{name: "appeared", during: func(out string) { put(out, "user.txt", "theirs") }, changed: true, keep: "user.txt"},
		{name: "empty folder appeared", during: func(out string) { os.Mkdir(out, 0o755) }, changed: true},
		{name: "replaced (force)", force: true,
			before: func(out string) { put(out, "old.txt", "ours"); put(out, writtenFile, "old.txt\n") },
			during: func(out string) { os.RemoveAll(out); put(out, "user.txt", "theirs") }, changed: true, keep: "user.txt"},
		{name: "removed (force)", force: true, before: func(out string) { put(out, "old.txt", "ours"); put(out, writtenFile, "old.txt\n") },
			during: func(out string) { os.RemoveAll(out) }, changed: true},
		{name: "empty folder accepted", before: func(out string) { os.Mkdir(out, 0o755) }},
		{name: "empty folder written into", before: func(out string) { os.Mkdir(out, 0o755) },
			during: func(out string) { put(out, "user.txt", "theirs") }, changed: true, keep: "user.txt"},
		{name: "replaced in place (force)", force: true, before: func(out string) { put(out, "old.txt", "ours"); put(out, writtenFile, "old.txt\n") }},
	} {
		t.Run(tc.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "maps")
			if tc.before != nil {
				tc.before(out)
			}
			s, err := NewStage(out, tc.force)
			if err != nil {
				t.Fatal(err)
			}
			put(s.tmp, "T2map.nii.gz", "new")
			if tc.during != nil {
				tc.during(out)
			}
			err = s.Commit()
			if tc.changed != errors.Is(err, ErrChanged) {
				t.Fatalf("Commit: %v, want changed %v", err, tc.changed)
			}
			if exists(s.tmp) {
				t.Error("temporary folder left")
			}
			if tc.keep != "" && read(filepath.Join(out, tc.keep)) != "theirs" {
				t.Errorf("%s lost", tc.keep)
			}
			if got := exists(filepath.Join(out, "T2map.nii.gz")); got == tc.changed {
				t.Errorf("new outputs written: %v, want %v (%v)", got, !tc.changed, err)
			}
			if tc.changed && err != nil && !strings.Contains(err.Error(), out+": changed during the run") {
				t.Errorf("message %q", err)
			}
			if olds, _ := filepath.Glob(filepath.Join(filepath.Dir(out), ".maps.old-*")); len(olds) > 0 {
				t.Errorf("left %v", olds)
			}
		})
	}
}

// TestInterruptedReplacement: a replacement killed between its two
// renames (previous outputs set aside in .NAME.old-*, the target absent,
// the new outputs in an abandoned temporary folder) is rolled back by the
// next stage for that output, which says so; one killed while deleting the
// previous outputs is finished. While a stage of the same output is alive
// (its temporary folder locked) nothing is rolled back.
func TestInterruptedReplacement(t *testing.T) {
	needLocks(t)
	parent := t.TempDir()
	out := filepath.Join(parent, "maps")
	old := filepath.Join(parent, ".maps.old-123")
	tmp := filepath.Join(parent, ".maps.tmp-456")
	read := func(p string) string { b, _ := os.ReadFile(p); return string(b) }
	exists := func(p string) bool { _, err := os.Stat(p); return err == nil }

	live, err := NewStage(out, true)
	if err != nil {
		t.Fatal(err)
	}
	os.Mkdir(old, 0o755)
	os.WriteFile(filepath.Join(old, "T2map.nii.gz"), []byte("previous"), 0o644)
	second, err := NewStage(out, false)
	if err != nil {
		t.Fatal(err)
	}
	if !exists(old) || exists(out) || len(second.Notes()) != 0 {
		t.Fatal("previous outputs moved while a stage of the same output is alive")
	}
	second.Abort()
	live.Abort()

	// The kill between the renames.
	os.Mkdir(tmp, 0o755)
	os.WriteFile(filepath.Join(tmp, "T2map.nii.gz"), []byte("half"), 0o644)
	os.WriteFile(filepath.Join(tmp, ownerFile), nil, 0o644) // its process is gone
	// Without --force the restored outputs are not replaced; the refusal
	// says what was restored.
	_, err = NewStage(out, false)
	if err == nil || !strings.Contains(err.Error(), "exists; use --force to replace it ("+out+": restored the previous outputs from .maps.old-123") {
		t.Errorf("err %v", err)
	}
	if read(filepath.Join(out, "T2map.nii.gz")) != "previous" {
		t.Error("previous outputs not restored")
	}
	if exists(tmp) || exists(old) {
		t.Error("leftovers kept")
	}

	// Killed while deleting the previous outputs: the target is complete.
	os.Mkdir(old, 0o755)
	os.WriteFile(filepath.Join(old, "T2map.nii.gz"), []byte("older"), 0o644)
	os.WriteFile(filepath.Join(out, writtenFile), []byte("T2map.nii.gz\n"), 0o644)
	s2, err := NewStage(out, true)
	if err != nil {
		t.Fatal(err)
	}
	defer s2.Abort()
	if exists(old) {
		t.Error("leftover of a finished replacement kept")
	}
	if read(filepath.Join(out, "T2map.nii.gz")) != "previous" {
		t.Error("target changed")
	}
	if n := s2.Notes(); len(n) != 1 || !strings.Contains(n[0], "finished an interrupted replacement") {
		t.Errorf("notes %q", n)
	}
}

// needLocks skips a test where file locks are unavailable.
func needLocks(t *testing.T) {
	t.Helper()
	if f, _ := lockStage(t.TempDir()); f == nil {
		t.Skip("file locks unavailable here")
	} else {
		f.Close()
	}
}

// TestForceReplacesOnlyOwnFiles (issue 17): --force replaces a folder that
// holds only what tauvox wrote there (its .tauvox-written list, or the
// outputs of a fit folder's provenance.json, with their PNG previews); a
// folder holding anything else is refused, naming the files, unless the
// user names the folder (NewStageReplacing); a committed stage lists what
// it wrote.
func TestForceReplacesOnlyOwnFiles(t *testing.T) {
	read := func(p string) string { b, _ := os.ReadFile(p); return string(b) }
	out := filepath.Join(t.TempDir(), "maps")
	s, err := NewStage(out, false)
	if err != nil {
		t.Fatal(err)
	}
	os.WriteFile(s.Path("T2map.nii.gz"), []byte("a"), 0o644)
	os.WriteFile(s.Path("provenance.json"), []byte("{}"), 0o644)
	if err := s.Commit(); err != nil {
		t.Fatal(err)
	}
	if got := read(filepath.Join(out, writtenFile)); got != "T2map.nii.gz\nprovenance.json\n" {
		t.Errorf("%s: %q", writtenFile, got)
	}
	// A preview drawn later is tauvox's too.
	os.WriteFile(filepath.Join(out, "T2map.png"), []byte("png"), 0o644)
	s, err = NewStage(out, true)
	if err != nil {
		t.Fatalf("own files: %v", err)
	}
	s.Abort()
	os.WriteFile(filepath.Join(out, "notes.txt"), []byte("mine"), 0o644)
	if _, err := NewStage(out, true); !errors.Is(err, ErrForeign) || !strings.Contains(err.Error(), "(notes.txt)") || !strings.Contains(err.Error(), "--force="+out) {
		t.Errorf("foreign file: %v", err)
	}
	if read(filepath.Join(out, "notes.txt")) != "mine" {
		t.Error("foreign file touched")
	}
	s, err = NewStageReplacing(out)
	if err != nil {
		t.Fatalf("named: %v", err)
	}
	s.Abort()
	// A fit folder from before the list: its provenance.json decides.
	old := filepath.Join(t.TempDir(), "old")
	os.Mkdir(old, 0o755)
	os.WriteFile(filepath.Join(old, "provenance.json"), []byte(`{"tool": "tauvox", "outputs": ["T2map.nii.gz", "T2map.json"]}`), 0o644)
	os.WriteFile(filepath.Join(old, "T2map.nii.gz"), nil, 0o644)
	os.WriteFile(filepath.Join(old, "T2map.json"), nil, 0o644)
	os.WriteFile(filepath.Join(old, "T2map.png"), nil, 0o644)
	if s, err := NewStage(old, true); err != nil {
		t.Errorf("old fit folder: %v", err)
	} else {
		s.Abort()
	}
	own, other, _ := Written(old)
	if len(own) != 4 || len(other) != 0 {
		t.Errorf("own %v other %v", own, other)
	}
}
