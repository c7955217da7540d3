package mapset

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
)

// ErrExists reports an output folder that exists when Force was not given.
var ErrExists = errors.New("exists; use --force to replace it")

// Stage is an output folder under construction.
type Stage struct {
	target string
	tmp    string
	force  bool
	done   bool
	owner  *os.File // locked owner file inside tmp; nil where locks are unavailable
}

// ownerFile is the file inside a temporary folder whose lock marks the
// folder as being written by a living process.
const ownerFile = ".tauvox-owner"

// NewStage prepares to write the folder dir: it refuses an existing dir
// unless force is set, and creates an empty temporary folder beside it.
func NewStage(dir string, force bool) (*Stage, error) {
	dir = filepath.Clean(dir)
	if st, err := os.Stat(dir); err == nil {
		if !force {
			return nil, fmt.Errorf("%s: %w", dir, ErrExists)
		}
		if !st.IsDir() {
			return nil, fmt.Errorf("%s: exists and is not a folder", dir)
		}
	}
	parent := filepath.Dir(dir)
	if err := os.MkdirAll(parent, 0o755); err != nil {
		return nil, err
	}
	sweep(parent, filepath.Base(dir))
	tmp, err := os.MkdirTemp(parent, "."+filepath.Base(dir)+".tmp-")
	if err != nil {
		return nil, err
	}
	// MkdirTemp makes the folder 0700; the finished output is as readable
	// as any other folder the user makes.
	if err := os.Chmod(tmp, 0o755); err != nil {
		os.RemoveAll(tmp)
		return nil, err
	}
	owner, err := lockStage(tmp)
	if err != nil {
		os.RemoveAll(tmp)
		return nil, err
	}
	s := &Stage{target: dir, tmp: tmp, force: force, owner: owner}
	s.register()
	return s, nil
}

// sweep removes the temporary folders of earlier runs for the same output
// that were abandoned (their process was killed before it could clean
// up): hidden folders named .NAME.tmp-* whose owner file nobody holds.
// Folders of runs still writing, and anything not made by a Stage, stay.
func sweep(parent, name string) {
	old, _ := filepath.Glob(filepath.Join(parent, "."+name+".tmp-*"))
	for _, d := range old {
		if st, err := os.Lstat(d); err == nil && st.IsDir() && abandoned(d) {
			os.RemoveAll(d)
		}
	}
}

// release drops the owner file of a finished stage now at dir.
func (s *Stage) release(dir string) {
	if s.owner != nil {
		s.owner.Close()
		os.Remove(filepath.Join(dir, ownerFile))
		s.owner = nil
	}
}

// Path returns the path of name inside the temporary folder.
func (s *Stage) Path(name string) string { return filepath.Join(s.tmp, name) }

// Target returns the final folder.
func (s *Stage) Target() string { return s.target }

// Commit moves the finished folder into place, replacing an existing one
// (Force) only after the new one is complete.
func (s *Stage) Commit() error {
	if s.done {
		return errors.New("mapset: stage already finished")
	}
	s.done = true
	s.unregister()
	if _, err := os.Stat(s.target); err == nil {
		old, err := os.MkdirTemp(filepath.Dir(s.target), "."+filepath.Base(s.target)+".old-")
		if err != nil {
			s.release(s.tmp)
			os.RemoveAll(s.tmp)
			return err
		}
		os.Remove(old)
		if err := os.Rename(s.target, old); err != nil {
			s.release(s.tmp)
			os.RemoveAll(s.tmp)
			return err
		}
		if err := os.Rename(s.tmp, s.target); err != nil {
			os.Rename(old, s.target)
			s.release(s.tmp)
			os.RemoveAll(s.tmp)
			return err
		}
		s.release(s.target)
		return os.RemoveAll(old)
	}
	if err := os.Rename(s.tmp, s.target); err != nil {
		s.release(s.tmp)
		os.RemoveAll(s.tmp)
		return err
	}
	s.release(s.target)
	return nil
}

// Abort removes the temporary folder. It is safe to call after Commit.
func (s *Stage) Abort() {
	if !s.done {
		s.done = true
		s.unregister()
		s.release(s.tmp)
		os.RemoveAll(s.tmp)
	}
}
