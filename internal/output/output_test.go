package output

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// TestWriteFile: the file appears whole with mode 0644, replaces an old
// one, and a failed write leaves the old file and no temporary file.
func TestWriteFile(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "a.json")
	if err := WriteFile(p, []byte("one")); err != nil {
		t.Fatal(err)
	}
	if err := WriteFile(p, []byte("two")); err != nil {
		t.Fatal(err)
	}
	b, _ := os.ReadFile(p)
	st, _ := os.Stat(p)
	if string(b) != "two" || st.Mode().Perm() != 0o644 {
		t.Errorf("content %q mode %v", b, st.Mode().Perm())
	}
	boom := errors.New("boom")
	err := WriteWith(p, func(w io.Writer) error { w.Write([]byte("partial")); return boom })
	if !errors.Is(err, boom) {
		t.Errorf("error %v", err)
	}
	b, _ = os.ReadFile(p)
	entries, _ := os.ReadDir(dir)
	if string(b) != "two" || len(entries) != 1 {
		t.Errorf("after a failed write: %q, %d entries", b, len(entries))
	}
	if err := WriteFile(filepath.Join(dir, "missing", "x"), nil); err == nil {
		t.Error("write into a missing folder succeeded")
	}
}

// TestLine: control characters are escaped, other text is unchanged.
func TestLine(t *testing.T) {
	for in, want := range map[string]string{
		"plain path/ü.nii":  "plain path/ü.nii",
		"two\nlines":        `two\nlines`,
		"esc\x1b[31m red\t": `esc\x1b[31m red\t`,
	} {
		if got := Line(in); got != want {
			t.Errorf("Line(%q) = %q, want %q", in, got, want)
		}
	}
}

// TestMessage: a wrapped message becomes one line.
func TestMessage(t *testing.T) {
	if got := Message("no such\n  table:\tx\x1b"); got != `no such table: x\x1b` {
		t.Errorf("Message = %q", got)
	}
}

// TestNum: fixed decimals as fmt's %.*f gives them; not finite is empty.
func TestNum(t *testing.T) {
	for _, c := range []struct {
		v    float64
		prec int
		want string
	}{
		{1.005, 2, fmt.Sprintf("%.*f", 2, 1.005)}, {-0.5, 0, "-0"}, {1234.5678, 1, "1234.6"}, {2, 3, "2.000"},
		{math.NaN(), 2, ""}, {math.Inf(-1), 1, ""},
	} {
		if got := Num(c.v, c.prec); got != c.want {
			t.Errorf("Num(%g, %d) = %q, want %q", c.v, c.prec, got, c.want)
		}
	}
}

// TestDeferDirSync: a folder whose flush is deferred is known as such
// until the deferral ends, and files committed into it (after StartSync)
// arrive whole.
func TestDeferDirSync(t *testing.T) {
	dir := t.TempDir()
	end := DeferDirSync(dir + "/")
	if !isDeferred(dir) {
		t.Fatal("folder not deferred")
	}
	f, err := Create(filepath.Join(dir, "a.bin"))
	if err != nil {
		t.Fatal(err)
	}
	f.Write([]byte("samples"))
	f.StartSync()
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
	SyncDir(dir)
	end()
	if isDeferred(dir) {
		t.Error("still deferred after end")
	}
	if b, _ := os.ReadFile(filepath.Join(dir, "a.bin")); string(b) != "samples" {
		t.Errorf("content %q", b)
	}
}
