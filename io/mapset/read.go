package mapset

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/volume"
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

// Map is one map read for measurement: its name (the stem), file, unit
// (the sidecar's Units, "" when absent), samples and, when it sits in a
// fit output folder with a status map, the status codes on its grid.
type Map struct {
	Name, Path, Unit string
	Image            *volume.Image
	Status           []uint8
}

// ReadMaps reads the maps named by paths: a map file, or a fit output
// folder (every map in it but status and fitquality, each with the
// folder's status codes). Every map must hold one volume.
func ReadMaps(paths []string) ([]Map, error) {
	var out []Map
	for _, p := range paths {
		st, err := os.Stat(p)
		if err != nil {
			return nil, err
		}
		if !st.IsDir() {
			im, err := nifti.Read(p)
			if err != nil {
				return nil, err
			}
			name := strings.TrimSuffix(strings.TrimSuffix(filepath.Base(p), ".gz"), ".nii")
			out = append(out, Map{Name: name, Path: p, Unit: sidecarUnit(p), Image: im})
			continue
		}
		f, err := Open(p)
		if err != nil {
			return nil, err
		}
		var status []uint8
		for _, stem := range f.Stems() {
			if stem == "status" || stem == "fitquality" {
				continue
			}
			im, err := nifti.Read(f.Maps[stem])
			if err != nil {
				return nil, err
			}
			if status == nil {
				if status, err = f.Status(im); err != nil {
					return nil, err
				}
			} else if len(status) != im.Voxels() {
				return nil, fmt.Errorf("%s: the status map and %s lie on different grids", f.Maps["status"], f.Maps[stem])
			}
			out = append(out, Map{Name: stem, Path: f.Maps[stem], Unit: sidecarUnit(f.Maps[stem]), Image: im, Status: status})
		}
	}
	for _, m := range out {
		if m.Image.Volumes() != 1 {
			return nil, fmt.Errorf("%s: a map must hold one volume, not %d", m.Path, m.Image.Volumes())
		}
	}
	return out, nil
}

// sidecarUnit reads "Units" from a map's JSON sidecar (x.nii.gz → x.json;
// "" when absent).
func sidecarUnit(mapPath string) string {
	b, err := os.ReadFile(strings.TrimSuffix(strings.TrimSuffix(mapPath, ".gz"), ".nii") + ".json")
	if err != nil {
		return ""
	}
	var s struct{ Units string }
	if json.Unmarshal(b, &s) != nil {
		return ""
	}
	return s.Units
}

// Choose returns the map stems of the folder named in the comma list
// maps, or, when it is empty, every map but the standard
// errors (_sd, BIDS desc-sd) and status.
func (f *Folder) Choose(maps string) ([]string, error) {
	var stems []string
	if maps != "" {
		for _, s := range strings.Split(maps, ",") {
			s = strings.TrimSpace(s)
			if _, ok := f.Maps[s]; !ok {
				return nil, fmt.Errorf("%s: no map %q (have %s)", f.Dir, s, strings.Join(f.Stems(), ", "))
			}
			stems = append(stems, s)
		}
		return stems, nil
	}
	for _, s := range f.Stems() {
		if !strings.HasSuffix(s, "_sd") && !strings.HasSuffix(s, "status") && !strings.Contains(s, "desc-sd") && !strings.Contains(s, "sd_") {
			stems = append(stems, s)
		}
	}
	return stems, nil
}

// Status reads the folder's status map (nil when it has none) and checks
// that it lies on the grid of ref, a map of the folder.
func (f *Folder) Status(ref *volume.Image) ([]uint8, error) {
	sp, ok := f.Maps["status"]
	if !ok {
		return nil, nil
	}
	s, err := nifti.Read(sp)
	if err != nil {
		return nil, err
	}
	if !volume.SameGrid(s, ref, 1e-3) {
		return nil, fmt.Errorf("%s: the status map and %s lie on different grids", sp, ref.Source.Path)
	}
	status := make([]uint8, len(s.Data))
	for i, v := range s.Data {
		status[i] = uint8(v)
	}
	return status, nil
}
