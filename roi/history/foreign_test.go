package history

import (
	"bytes"
	"database/sql"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestForeignDatabaseUntouched: opening another program's SQLite file for
// writing is refused and leaves the file byte for byte as it was (found
// by the robustness catalogue: the journal mode was switched to WAL
// before the file was recognised as not ours).
func TestForeignDatabaseUntouched(t *testing.T) {
	p := filepath.Join(t.TempDir(), "other.db")
	db, err := sql.Open("sqlite", p)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := db.Exec("CREATE TABLE patients (name TEXT)"); err != nil {
		t.Fatal(err)
	}
	db.Close()
	before, _ := os.ReadFile(p)
	if _, err := Open(p, nil); err == nil || !strings.Contains(err.Error(), "not a tauvox history") {
		t.Fatalf("Open: %v", err)
	}
	after, _ := os.ReadFile(p)
	if !bytes.Equal(before, after) {
		t.Error("the foreign database was changed")
	}
	for _, side := range []string{"-wal", "-shm"} {
		if _, err := os.Stat(p + side); err == nil {
			t.Errorf("left %s%s", p, side)
		}
	}
}
