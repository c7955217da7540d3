package regular

import (
	"errors"
	"net"
	"os"
	"path/filepath"
	"syscall"
	"testing"
	"time"
)

// TestRefuses checks that a FIFO with no writer, a socket, a device and a
// folder are refused at once (a plain os.Open of the FIFO blocks until a
// writer appears: POSIX open(2), O_NONBLOCK), and that a regular file and
// a symbolic link to one are read.
func TestRefuses(t *testing.T) {
	dir := t.TempDir()
	fifo := filepath.Join(dir, "pipe")
	if err := syscall.Mkfifo(fifo, 0o644); err != nil {
		t.Skip("no FIFOs here:", err)
	}
	sock := filepath.Join(dir, "sock")
	l, err := net.Listen("unix", sock)
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	plain := filepath.Join(dir, "plain")
	if err := os.WriteFile(plain, []byte("data"), 0o644); err != nil {
		t.Fatal(err)
	}
	link := filepath.Join(dir, "link")
	if err := os.Symlink(plain, link); err != nil {
		t.Fatal(err)
	}
	fifoLink := filepath.Join(dir, "fifolink")
	if err := os.Symlink(fifo, fifoLink); err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		path, kind string
	}{
		{fifo, "named pipe (FIFO)"},
		{fifoLink, "named pipe (FIFO)"},
		{"/dev/null", "character device"},
		{dir, "folder"},
	}
	for _, tc := range cases {
		done := make(chan error, 1)
		go func() { _, err := ReadFile(tc.path); done <- err }()
		select {
		case err := <-done:
			var nr *NotRegularError
			if !errors.As(err, &nr) || nr.Kind != tc.kind || !errors.Is(err, ErrNotRegular) {
				t.Errorf("%s: err %v, want a %s", tc.path, err, tc.kind)
			}
			if err != nil && err.Error() != tc.path+": is a "+tc.kind+", not a regular file" {
				t.Errorf("message %q", err)
			}
		case <-time.After(5 * time.Second):
			t.Fatalf("%s: ReadFile blocked", tc.path)
		}
		if err := Check(tc.path); !errors.Is(err, ErrNotRegular) {
			t.Errorf("Check(%s) = %v", tc.path, err)
		}
	}
	// A socket cannot be opened at all (ENXIO); it is refused either way.
	if _, err := Open(sock); err == nil {
		t.Error("socket opened")
	}
	if err := Check(sock); !errors.Is(err, ErrNotRegular) {
		t.Errorf("Check(socket) = %v", err)
	}
	for _, p := range []string{plain, link} {
		b, err := ReadFile(p)
		if err != nil || string(b) != "data" {
			t.Errorf("%s: %q, %v", p, b, err)
		}
	}
	if err := Check(filepath.Join(dir, "absent")); err != nil {
		t.Errorf("Check(absent) = %v", err)
	}
}
