package mapset

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"syscall"

	"github.com/tauvox/tauvox/internal/output"
)

// ErrExists reports an output folder that exists when Force was not given.
var ErrExists = errors.New("exists; use --force to replace it")

// ErrChanged reports an output folder that appeared, or was replaced or
// written into, while the stage was being built: the finished outputs are
// not moved there, so nothing that appeared is lost.
var ErrChanged = errors.New("changed during the run")

// Stage is an output folder under construction.
type Stage struct {
	target string
	tmp    string
	force  bool
	done   bool
	owner  *os.File    // locked owner file inside tmp; nil where locks are unavailable
	start  os.FileInfo // the target as found at the start (nil: absent)
	empty  bool        // the target was an empty folder at the start
	notes  []string
	// endDefer ends the deferral of the folder's flush (register).
	endDefer func()
}

// ownerFile is the file inside a temporary folder whose lock marks the
// folder as being written by a living process.
const ownerFile = ".tauvox-owner"

// ErrForeign reports a folder that --force would replace but that holds
// files tauvox did not write there.
var ErrForeign = errors.New("holds files tauvox did not write")

// writtenFile lists, in a finished output folder, the entries the stage put
// there (one name a line), so that a later --force can tell them from
// files of the user's.
const writtenFile = ".tauvox-written"

// NewStage prepares to write the folder dir: it refuses an existing dir
// unless dir is an empty folder or force is set and dir holds only what
// tauvox wrote there (Written), and creates an empty temporary folder
// beside it. It first tidies what earlier runs for the same output left
// when they were killed (see Notes).
func NewStage(dir string, force bool) (*Stage, error) {
	return newStage(dir, force, false)
}

// NewStageReplacing is NewStage with force for a folder the user named
// explicitly for replacement (--force=DIR): it is replaced whatever it
// holds.
func NewStageReplacing(dir string) (*Stage, error) {
	return newStage(dir, true, true)
}

// Written returns the entries of the folder dir that tauvox wrote there:
// those listed in its .tauvox-written file (or, for a fit folder written
// before that file existed, the outputs its provenance.json lists and
// provenance.json), the PNG preview of any NIfTI map among them, and the
// list itself; and the other entries, sorted.
func Written(dir string) (own, other []string, err error) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, nil, err
	}
	set := map[string]bool{writtenFile: true}
	if b, err := os.ReadFile(filepath.Join(dir, writtenFile)); err == nil {
		for _, n := range strings.Split(string(b), "\n") {
			if n != "" {
				set[n] = true
			}
		}
	} else if b, err := os.ReadFile(filepath.Join(dir, "provenance.json")); err == nil {
		var p struct {
			Tool    string   `json:"tool"`
			Outputs []string `json:"outputs"`
		}
		if json.Unmarshal(b, &p) == nil && p.Tool == "tauvox" {
			set["provenance.json"] = true
			for _, n := range p.Outputs {
				set[n] = true
			}
		}
	}
	for n := range set {
		if stem, ok := strings.CutSuffix(n, ".nii.gz"); ok {
			set[stem+".png"] = true
		}
	}
	for _, e := range ents {
		if set[e.Name()] {
			own = append(own, e.Name())
		} else {
			other = append(other, e.Name())
		}
	}
	return own, other, nil
}

func newStage(dir string, force, named bool) (*Stage, error) {
	dir = filepath.Clean(dir)
	parent := filepath.Dir(dir)
	if err := os.MkdirAll(parent, 0o755); err != nil {
		return nil, err
	}
	s := &Stage{target: dir, force: force}
	s.notes = sweep(parent, filepath.Base(dir))
	if st, err := os.Lstat(dir); err == nil {
		empty := st.IsDir() && isEmpty(dir)
		switch {
		case !force && !empty && len(s.notes) > 0:
			return nil, fmt.Errorf("%s: %w (%s)", dir, ErrExists, strings.Join(s.notes, "; "))
		case !force && !empty:
			return nil, fmt.Errorf("%s: %w", dir, ErrExists)
		case !st.IsDir():
			return nil, fmt.Errorf("%s: exists and is not a folder", dir)
		case !empty && !named:
			_, other, err := Written(dir)
			if err != nil {
				return nil, err
			}
			if len(other) > 0 {
				list := other
				if len(list) > 3 {
					list = append(append([]string(nil), list[:3]...), "…")
				}
				return nil, fmt.Errorf("%s: %w (%s); move them away, or give --force=%s to replace the folder with everything in it", dir, ErrForeign, strings.Join(list, ", "), dir)
			}
		}
		s.start, s.empty = st, empty
	} else if !errors.Is(err, os.ErrNotExist) {
		return nil, err
	}
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
	s.tmp, s.owner = tmp, owner
	s.register()
	return s, nil
}

// Notes returns what NewStage did to leftovers of earlier, killed runs
// for the same output (a half-done replacement rolled back or finished),
// one line each, for the command to print.
func (s *Stage) Notes() []string { return s.notes }

// isEmpty reports whether the folder dir holds no entry.
func isEmpty(dir string) bool {
	f, err := os.Open(dir)
	if err != nil {
		return false
	}
	defer f.Close()
	_, err = f.Readdirnames(1)
	return errors.Is(err, io.EOF)
}

// sweep tidies what killed runs for the output parent/name left behind:
//   - temporary folders (.NAME.tmp-*) whose owner file nobody holds are
//     removed; folders of runs still writing, and anything not made by a
//     Stage, stay;
//   - previous outputs set aside by a replacement (.NAME.old-*): when no
//     run is writing that output, a replacement killed between its two
//     renames (NAME absent) is rolled back by moving the newest one back
//     to NAME, and one killed while deleting it (NAME present) is finished
//     by deleting it.
//
// It returns a note for each replacement rolled back or finished.
func sweep(parent, name string) []string {
	target := filepath.Join(parent, name)
	live := owned(target) // a finished stage whose owner has not let go yet
	tmps, _ := filepath.Glob(filepath.Join(parent, "."+name+".tmp-*"))
	for _, d := range tmps {
		if st, err := os.Lstat(d); err == nil && st.IsDir() {
			if abandoned(d) {
				os.RemoveAll(d)
			} else if owned(d) {
				live = true
			}
		}
	}
	if live {
		return nil
	}
	olds, _ := filepath.Glob(filepath.Join(parent, "."+name+".old-*"))
	type old struct {
		path string
		mod  int64
	}
	var found []old
	for _, d := range olds {
		if st, err := os.Lstat(d); err == nil && st.IsDir() {
			found = append(found, old{d, st.ModTime().UnixNano()})
		}
	}
	sort.Slice(found, func(i, j int) bool { return found[i].mod > found[j].mod })
	var notes []string
	for _, o := range found {
		if _, err := os.Lstat(target); errors.Is(err, os.ErrNotExist) {
			if os.Rename(o.path, target) == nil {
				notes = append(notes, fmt.Sprintf("%s: restored the previous outputs from %s, set aside by a replacement that was interrupted", target, filepath.Base(o.path)))
				continue
			}
		}
		if os.RemoveAll(o.path) == nil {
			notes = append(notes, fmt.Sprintf("%s: finished an interrupted replacement (removed the previous outputs left in %s)", target, filepath.Base(o.path)))
		}
	}
	return notes
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

// Commit moves the finished folder into place. A target absent at the
// start must still be absent (an atomic rename that never replaces, where
// the system has one); an empty folder found at the start must still be
// that folder and empty; a folder to replace (Force) must still be the
// folder found at the start, and is replaced only after the new one is
// complete. Otherwise ErrChanged, and nothing at the target is touched.
func (s *Stage) Commit() error {
	if s.done {
		return errors.New("mapset: stage already finished")
	}
	s.done = true
	s.unregister()
	fail := func(err error) error {
		s.release(s.tmp)
		os.RemoveAll(s.tmp)
		return err
	}
	changed := func(what string) error {
		return fail(fmt.Errorf("%s: %w (%s); it was left as it is and the new outputs were not written", s.target, ErrChanged, what))
	}
	if err := s.writeList(); err != nil {
		return fail(err)
	}
	// Every file was synced as it was committed; the folder's entries are
	// flushed here, once, before it is renamed into place, and the rename
	// after it (the parent's flush, syncParent).
	output.SyncDir(s.tmp)
	now, err := os.Lstat(s.target)
	switch {
	case err != nil && !errors.Is(err, os.ErrNotExist):
		return fail(err)
	case s.start == nil && err == nil:
		return changed("a folder appeared there")
	case s.start != nil && err != nil:
		return changed("the folder was removed")
	case s.start != nil && !os.SameFile(s.start, now):
		return changed("another folder took its place")
	case s.start != nil && !now.ModTime().Equal(s.start.ModTime()):
		// The same inode number may be reused by a folder made anew after
		// the old one was removed; a folder's time of modification changes
		// whenever an entry is added, removed or renamed in it.
		return changed("files were added to or removed from it")
	}
	switch {
	case s.start == nil:
		if err := renameNoReplace(s.tmp, s.target); err != nil {
			if errors.Is(err, os.ErrExist) {
				return changed("a folder appeared there")
			}
			return fail(err)
		}
	case s.empty:
		// rename(2) replaces an empty folder and fails on one that is
		// not empty any more (os.Rename refuses any folder: syscall).
		if err := syscall.Rename(s.tmp, s.target); err != nil {
			if !isEmpty(s.target) {
				return changed("files were written into it")
			}
			return fail(err)
		}
	default:
		old, err := os.MkdirTemp(filepath.Dir(s.target), "."+filepath.Base(s.target)+".old-")
		if err != nil {
			return fail(err)
		}
		os.Remove(old)
		if err := os.Rename(s.target, old); err != nil {
			return fail(err)
		}
		// A kill here leaves the previous outputs in old and the new ones
		// in tmp; the next stage for this output rolls back (sweep).
		if err := os.Rename(s.tmp, s.target); err != nil {
			os.Rename(old, s.target)
			return fail(err)
		}
		s.syncParent()
		s.release(s.target)
		return os.RemoveAll(old)
	}
	s.syncParent()
	s.release(s.target)
	return nil
}

// syncParent flushes the rename of the finished folder into place.
func (s *Stage) syncParent() { output.SyncDir(filepath.Dir(s.target)) }

// writeList writes the names of the stage's entries (the owner file
// aside) into its .tauvox-written file.
func (s *Stage) writeList() error {
	ents, err := os.ReadDir(s.tmp)
	if err != nil {
		return err
	}
	var b strings.Builder
	for _, e := range ents {
		if n := e.Name(); n != ownerFile && n != writtenFile {
			b.WriteString(n + "\n")
		}
	}
	return os.WriteFile(filepath.Join(s.tmp, writtenFile), []byte(b.String()), 0o644)
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
