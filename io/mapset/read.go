package mapset

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"
)

// Folder is a fit output folder as read back: its maps by stem (T1map,
// T2map_sd, status, ...) and its provenance when present.
type Folder struct {
	Dir        string
	Maps       map[string]string // stem → path of <stem>.nii.gz or <stem>.nii
	Provenance *Provenance
}

// Open reads the listing and provenance.json of a fit output folder.
func Open(dir string) (*Folder, error) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil, err
	}
	f := &Folder{Dir: dir, Maps: map[string]string{}}
	for _, e := range entries {
		name := e.Name()
		if e.IsDir() || strings.HasPrefix(name, ".") {
			continue
		}
		for _, ext := range []string{".nii.gz", ".nii"} {
			if strings.HasSuffix(name, ext) {
				f.Maps[strings.TrimSuffix(name, ext)] = filepath.Join(dir, name)
				break
			}
		}
	}
	if len(f.Maps) == 0 {
		return nil, fmt.Errorf("%s: holds no NIfTI map", dir)
	}
	p := filepath.Join(dir, "provenance.json")
	if b, err := os.ReadFile(p); err == nil {
		var prov Provenance
		if err := json.Unmarshal(b, &prov); err != nil {
			return nil, fmt.Errorf("%s: %v", p, err)
		}
		f.Provenance = &prov
	}
	return f, nil
}

// Stems returns the map stems in sorted order.
func (f *Folder) Stems() []string {
	s := make([]string, 0, len(f.Maps))
	for k := range f.Maps {
		s = append(s, k)
	}
	sort.Strings(s)
	return s
}
