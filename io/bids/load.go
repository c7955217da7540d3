package bids

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"github.com/tauvox/tauvox/internal/regular"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/io/sidecar"
	"github.com/tauvox/tauvox/volume"
)

// Sidecars returns the JSON files that apply to the image at path under
// the inheritance principle, shallowest first: files of the same suffix
// at the dataset root, the subject, the session and the image's folder
// whose entities are a subset of the image's (within one folder, those
// with fewer entities first).
func Sidecars(root, path string) ([]string, error) {
	n, err := ParseName(filepath.Base(path))
	if err != nil {
		return nil, err
	}
	rel, err := filepath.Rel(root, filepath.Dir(path))
	if err != nil {
		return nil, err
	}
	levels := []string{root}
	cur := root
	for _, p := range strings.Split(filepath.ToSlash(rel), "/") {
		if p == "." || p == "" {
			continue
		}
		cur = filepath.Join(cur, p)
		levels = append(levels, cur)
	}
	var out []string
	for _, dir := range levels {
		ents, err := os.ReadDir(dir)
		if err != nil {
			return nil, err
		}
		type cand struct {
			path string
			n    int
		}
		var cs []cand
		for _, e := range ents {
			if e.IsDir() || !strings.HasSuffix(e.Name(), ".json") {
				continue
			}
			m, err := ParseName(e.Name())
			if err != nil || m.Ext != ".json" || m.Suffix != n.Suffix || !m.subsetOf(n) {
				continue
			}
			cs = append(cs, cand{filepath.Join(dir, e.Name()), len(m.Entities)})
		}
		sort.SliceStable(cs, func(i, j int) bool { return cs[i].n < cs[j].n || cs[i].n == cs[j].n && cs[i].path < cs[j].path })
		for _, c := range cs {
			out = append(out, c.path)
		}
	}
	return out, nil
}

// readMerged reads the sidecars in order and merges their top-level keys
// (later files override earlier ones), then parses the result as a
// sidecar. The error names the file at fault; name is the image path used
// in errors about the merged values.
func readMerged(paths []string, name string) (*sidecar.Sidecar, error) {
	merged := map[string]json.RawMessage{}
	for _, p := range paths {
		b, err := regular.ReadFile(p)
		if err != nil {
			return nil, err
		}
		if len(b) > sidecar.MaxSize {
			return nil, fmt.Errorf("%s: larger than %d bytes", p, sidecar.MaxSize)
		}
		var m map[string]json.RawMessage
		if err := json.Unmarshal(b, &m); err != nil {
			return nil, fmt.Errorf("%s: not a JSON object: %v", p, err)
		}
		for k, v := range m {
			merged[k] = v
		}
	}
	b, err := json.Marshal(merged)
	if err != nil {
		return nil, err
	}
	label := name
	if len(paths) == 1 {
		label = paths[0]
	} else if len(paths) > 1 {
		label = paths[len(paths)-1] + " (with inherited sidecars)"
	}
	return sidecar.Parse(bytes.TrimSpace(b), label)
}

// Load reads the files of c and stacks them into one 4-D image in index
// order, with the acquisition parameters of each file's (inherited)
// sidecar. Every file must be 3-D when the collection has several, and all
// must share one grid (dimensions, and the affine within 1e-3 mm). It
// returns the image and every file read (images with role "series",
// sidecars with role "sidecar", each once).
func (c *Collection) Load() (*volume.Image, []series.Input, error) {
	var inputs []series.Input
	seen := map[string]bool{}
	addInput := func(p, role string) {
		if !seen[p] {
			seen[p] = true
			inputs = append(inputs, series.Input{Path: p, Role: role})
		}
	}
	var out *volume.Image
	for i, f := range c.Files {
		im, err := nifti.Read(f.Path)
		if err != nil {
			return nil, nil, err
		}
		scs, err := Sidecars(c.Root, f.Path)
		if err != nil {
			return nil, nil, fmt.Errorf("%s: sidecars: %v", f.Path, err)
		}
		if len(scs) == 0 {
			return nil, nil, fmt.Errorf("%s: no sidecar (%s) gives its acquisition parameters", f.Path, series.SidecarName(f.Path))
		}
		side, err := readMerged(scs, f.Path)
		if err != nil {
			return nil, nil, err
		}
		nt := im.Dims[3]
		if im.Acq, err = side.Acquisitions(nt); err != nil {
			return nil, nil, err
		}
		im.Source.Path, im.Source.Format = f.Path, "nifti"
		side.ApplySource(&im.Source)
		addInput(f.Path, "series")
		for _, s := range scs {
			addInput(s, "sidecar")
		}
		if len(c.Files) == 1 {
			out = im
			break
		}
		if nt != 1 {
			return nil, nil, fmt.Errorf("%s: holds %d volumes; each file of a %s collection must be one 3-D volume", f.Path, nt, c.Suffix)
		}
		if i == 0 {
			out = &volume.Image{Dims: im.Dims, Affine: im.Affine, Source: im.Source}
			out.Dims[3] = len(c.Files)
			out.Data = make([]float32, 0, im.Voxels()*len(c.Files))
			out.Source.Path = filepath.Join(c.Root, c.Dir)
			out.Source.Description = c.Base.String()
		} else if !volume.SameGrid(out, im, 1e-3) {
			return nil, nil, fmt.Errorf("%s: grid (%d×%d×%d or affine) differs from %s", f.Path, im.Dims[0], im.Dims[1], im.Dims[2], filepath.Base(c.Files[0].Path))
		}
		out.Data = append(out.Data, im.Data...)
		out.Acq = append(out.Acq, im.Acq[0])
	}
	if out.Source.Description == "" {
		out.Source.Description = c.Base.String()
	}
	return out, inputs, out.Validate()
}
