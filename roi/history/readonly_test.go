package history

import (
	"context"
	"os"
	"path/filepath"
	"syscall"
	"testing"
)

// leftovers lists the -wal, -shm and -journal files beside the database.
func leftovers(db string) []string {
	var out []string
	for _, ext := range []string{"-wal", "-shm", "-journal"} {
		if _, err := os.Stat(db + ext); err == nil {
			out = append(out, filepath.Base(db+ext))
		}
	}
	return out
}

// TestReadOnlyLeavesNothing: reading a history (list, export, chart open
// it ReadOnly) leaves no -wal or -shm file beside the database and cannot
// change it; on a read-only medium (a read-only bind mount, where this
// process may mount) the database is read as immutable and listed.
func TestReadOnlyLeavesNothing(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	db := filepath.Join(dir, "h.db")
	w, err := Open(db, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, d := range []string{"2026-05-01 09:00", "2026-06-01 09:00"} {
		if _, err := w.Add(ctx, session(d, map[[2]string]float64{{"A1", "T1"}: 1}), "q.json"); err != nil {
			t.Fatal(err)
		}
	}
	w.Close()
	if l := leftovers(db); len(l) > 0 {
		t.Fatalf("writer left %v", l)
	}
	before, _ := os.ReadFile(db)
	r, err := Open(db, &Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	list, err := r.Sessions(ctx, "")
	if err != nil || len(list) != 2 {
		t.Fatalf("sessions %v, %v", list, err)
	}
	if _, err := r.Add(ctx, session("2026-07-01 09:00", map[[2]string]float64{{"A1", "T1"}: 1}), "q.json"); err == nil {
		t.Error("a read-only store recorded a session")
	}
	r.Close()
	if l := leftovers(db); len(l) > 0 {
		t.Errorf("read-only use left %v", l)
	}
	if after, _ := os.ReadFile(db); string(after) != string(before) {
		t.Error("read-only use changed the database")
	}

	// A read-only medium.
	ro := filepath.Join(t.TempDir(), "ro")
	os.Mkdir(ro, 0o755)
	if err := syscall.Mount(dir, ro, "", syscall.MS_BIND, ""); err != nil {
		t.Skipf("cannot bind-mount here (%v): the read-only medium case is not run", err)
	}
	defer syscall.Unmount(ro, 0)
	if err := syscall.Mount("", ro, "", syscall.MS_REMOUNT|syscall.MS_BIND|syscall.MS_RDONLY, ""); err != nil {
		t.Skipf("cannot remount read-only here (%v)", err)
	}
	r, err = Open(filepath.Join(ro, "h.db"), &Options{ReadOnly: true})
	if err != nil {
		t.Fatalf("read-only medium: %v", err)
	}
	defer r.Close()
	if list, err := r.Sessions(ctx, ""); err != nil || len(list) != 2 {
		t.Errorf("read-only medium: sessions %v, %v", list, err)
	}
}
