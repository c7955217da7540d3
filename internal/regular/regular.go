package regular

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
)

// ErrNotRegular is wrapped by the errors of Open and ReadFile for a path
// that names a FIFO, socket, device or other non-regular file.
var ErrNotRegular = errors.New("not a regular file")

// NotRegularError names the path and what it is.
type NotRegularError struct {
	Path string
	Kind string // "named pipe (FIFO)", "socket", "device", "folder", ...
}

func (e *NotRegularError) Error() string {
	return fmt.Sprintf("%s: is a %s, not a regular file", e.Path, e.Kind)
}

// Unwrap makes errors.Is(err, ErrNotRegular) true.
func (e *NotRegularError) Unwrap() error { return ErrNotRegular }

// Kind names a file mode's type for messages.
func Kind(m fs.FileMode) string {
	switch {
	case m&fs.ModeNamedPipe != 0:
		return "named pipe (FIFO)"
	case m&fs.ModeSocket != 0:
		return "socket"
	case m&fs.ModeCharDevice != 0:
		return "character device"
	case m&fs.ModeDevice != 0:
		return "device"
	case m.IsDir():
		return "folder"
	case m&fs.ModeIrregular != 0:
		return "irregular file"
	}
	return "special file"
}

// Open opens path for reading if it is a regular file (following
// symbolic links), without blocking on a FIFO or device.
func Open(path string) (*os.File, error) {
	f, _, err := OpenInfo(path)
	return f, err
}

// OpenInfo is Open that also returns the file's information (read once:
// callers that need the size need no second stat).
func OpenInfo(path string) (*os.File, os.FileInfo, error) {
	f, err := os.OpenFile(path, os.O_RDONLY|nonBlock, 0)
	if err != nil {
		return nil, nil, err
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, nil, err
	}
	if !st.Mode().IsRegular() {
		f.Close()
		return nil, nil, &NotRegularError{Path: path, Kind: Kind(st.Mode())}
	}
	if err := clearNonBlock(f); err != nil {
		f.Close()
		return nil, nil, err
	}
	return f, st, nil
}

// ReadFile is os.ReadFile for regular files only.
func ReadFile(path string) ([]byte, error) {
	f, err := Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return io.ReadAll(f)
}

// Check reports a NotRegularError when path exists and is not a regular
// file (nil when it does not exist: the caller may create it). It reads
// the mode only, so it never blocks; used before handing a path to code
// that opens it itself (a database driver).
func Check(path string) error {
	st, err := os.Stat(path)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil
		}
		return err
	}
	if !st.Mode().IsRegular() {
		return &NotRegularError{Path: path, Kind: Kind(st.Mode())}
	}
	return nil
}
