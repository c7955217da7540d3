package mapset

import (
	"path/filepath"
	"strings"
	"sync"

	"github.com/tauvox/tauvox/internal/output"
)

// stages maps the temporary folder of every open Stage to its final
// folder, so that paths recorded while a folder is being written (the
// inputs named in provenance.json and qa.json) name the files where they
// will be once the command ends, not a temporary folder that is gone by
// then.
var stages struct {
	sync.Mutex
	final map[string]string
}

func (s *Stage) register() {
	stages.Lock()
	defer stages.Unlock()
	if stages.final == nil {
		stages.final = map[string]string{}
	}
	stages.final[s.tmp] = s.target
	// The entries of the folder are flushed once, by Commit, not after
	// every file committed into it.
	s.endDefer = output.DeferDirSync(s.tmp)
}

func (s *Stage) unregister() {
	stages.Lock()
	defer stages.Unlock()
	delete(stages.final, s.tmp)
	if s.endDefer != nil {
		s.endDefer()
	}
}

// FinalPath returns p with the temporary folder of any open Stage it lies
// in replaced by that stage's final folder (repeatedly, for a stage
// inside another's temporary folder); other paths are returned as they
// are.
func FinalPath(p string) string {
	stages.Lock()
	defer stages.Unlock()
	for range 8 {
		changed := false
		for tmp, final := range stages.final {
			if p == tmp {
				p, changed = final, true
			} else if rest, ok := strings.CutPrefix(p, tmp+string(filepath.Separator)); ok {
				p, changed = filepath.Join(final, rest), true
			}
		}
		if !changed {
			break
		}
	}
	return p
}
