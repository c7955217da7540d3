package output

import (
	"bufio"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sync"
)

// File is a file being written under a temporary name in the folder of
// its target. Write to it (it is an *os.File), then Commit to put it in
// place or Abort to remove it. It is not safe for concurrent use.
type File struct {
	*os.File
	path string
	done bool
}

// Create starts writing path: it creates a hidden temporary file
// (.NAME.*.tmp) beside it with mode 0644. path is left as it is until
// Commit.
func Create(path string) (*File, error) {
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	f, err := os.CreateTemp(dir, "."+base+".*.tmp")
	if err != nil {
		return nil, err
	}
	if err := f.Chmod(0o644); err != nil { // CreateTemp makes 0600
		f.Close()
		os.Remove(f.Name())
		return nil, err
	}
	return &File{File: f, path: path}, nil
}

// Path returns the target path.
func (f *File) Path() string { return f.path }

// StartSync starts writing the file's data to disk without waiting for
// it, where the system allows it (Linux: sync_file_range(2) with
// SYNC_FILE_RANGE_WRITE); elsewhere it does nothing. A writer that has
// written everything but commits later (after other work) calls it so
// that the sync in Commit finds the data on its way.
func (f *File) StartSync() { startSync(f.File) }

// Commit syncs and closes the temporary file, renames it to the target
// (replacing a file there) and syncs the folder, unless the folder's
// flush is deferred to its owner (DeferDirSync). On error the temporary
// file is removed and the target left as it was.
func (f *File) Commit() error {
	if f.done {
		return fmt.Errorf("output: %s already finished", f.path)
	}
	f.done = true
	err := f.Sync()
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(f.Name(), f.path)
	}
	if err != nil {
		os.Remove(f.Name())
		return err
	}
	if dir := filepath.Dir(f.path); !isDeferred(dir) {
		SyncDir(dir)
	}
	return nil
}

// Abort closes and removes the temporary file. It does nothing after
// Commit or Abort.
func (f *File) Abort() {
	if !f.done {
		f.done = true
		f.Close()
		os.Remove(f.Name())
	}
}

// WriteFile writes b to path atomically (Create, Write, Commit). The error
// names path.
func WriteFile(path string, b []byte) error {
	return WriteWith(path, func(w io.Writer) error {
		_, err := w.Write(b)
		return err
	})
}

// WriteWith writes path atomically through fn, which gets a buffered
// writer. The error names path.
func WriteWith(path string, fn func(io.Writer) error) error {
	f, err := Create(path)
	if err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	w := bufio.NewWriter(f)
	if err = fn(w); err == nil {
		err = w.Flush()
	}
	if err == nil {
		err = f.Commit()
	}
	if err != nil {
		f.Abort()
		return fmt.Errorf("%s: %w", path, err)
	}
	return nil
}

// SyncDir flushes a folder's entries (a rename) to disk where the system
// allows it; errors are ignored (some file systems refuse it).
func SyncDir(dir string) {
	if d, err := os.Open(dir); err == nil {
		d.Sync()
		d.Close()
	}
}

// deferred holds the folders (cleaned paths) whose entries their owner
// flushes once, when every file is in, instead of File.Commit after each
// rename into them: a folder of outputs that is itself renamed into place
// when complete is flushed once before that rename (every file in it is
// still synced by its Commit).
var deferred sync.Map

// DeferDirSync makes File.Commit leave the flush of dir's entries to the
// caller, who must call SyncDir(dir) once every file is in, before it
// relies on them; the returned function ends the deferral.
func DeferDirSync(dir string) (end func()) {
	dir = filepath.Clean(dir)
	deferred.Store(dir, struct{}{})
	return func() { deferred.Delete(dir) }
}

func isDeferred(dir string) bool {
	_, ok := deferred.Load(filepath.Clean(dir))
	return ok
}
