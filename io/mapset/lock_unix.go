//go:build unix

package mapset

import (
	"os"
	"path/filepath"
	"syscall"
)

// lockStage creates the owner file in a temporary folder and takes an
// exclusive lock on it. The system drops the lock when the process ends,
// however it ends (SIGKILL included), which is what lets a later run tell
// an abandoned folder from one still being written.
func lockStage(tmp string) (*os.File, error) {
	f, err := os.OpenFile(filepath.Join(tmp, ownerFile), os.O_CREATE|os.O_RDWR, 0o644)
	if err != nil {
		return nil, err
	}
	if err := syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB); err != nil {
		f.Close()
		return nil, err
	}
	return f, nil
}

// abandoned reports whether the temporary folder tmp has an owner file
// that no process holds locked. A folder without one (another writer's,
// or one being created this instant) is never abandoned.
func abandoned(tmp string) bool {
	f, err := os.Open(filepath.Join(tmp, ownerFile))
	if err != nil {
		return false
	}
	defer f.Close() // releases the lock taken below
	return syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB) == nil
}

// owned reports whether the folder dir holds an owner file that a living
// process keeps locked (a stage being written, or a finished one whose
// owner has not yet let go).
func owned(dir string) bool {
	f, err := os.Open(filepath.Join(dir, ownerFile))
	if err != nil {
		return false
	}
	defer f.Close()
	return syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB) != nil
}
