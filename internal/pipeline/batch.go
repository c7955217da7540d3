package pipeline

import (
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/bids"
	"github.com/tauvox/tauvox/io/mapset"
)

// Job is one series of a BIDS batch: a file collection, the model that
// fits it and where its derivatives go.
type Job struct {
	Pub   bids.Publication
	Model fit.Model
	// Root is the raw dataset (inputs are compared relative to it).
	Root string
}

// Plan makes one job per collection of ds, with the model modelOf names
// for its suffix, writing into the derivative dataset out. Every output of
// a job carries desc-<SUFFIX> (bids.DerivativeName).
func Plan(ds *bids.Dataset, out string, modelOf map[string]string) ([]*Job, error) {
	var jobs []*Job
	for _, c := range ds.Collections {
		m, err := fit.New(fit.Spec{Model: modelOf[c.Suffix]})
		if err != nil {
			return nil, err
		}
		info, _ := fit.Lookup(m.Name())
		jobs = append(jobs, &Job{Model: m, Root: ds.Root, Pub: bids.Publication{Collection: c, Dir: filepath.Join(out, filepath.FromSlash(c.Dir)),
			Stems: Stems(m), Reference: info.Reference}})
	}
	return jobs, nil
}

// Stems returns the map stems a fit with the model writes.
func Stems(m fit.Model) []string {
	var s []string
	for _, p := range m.Outputs() {
		s = append(s, p.Map, p.Map+"_sd")
	}
	return append(s, "fitquality", "status")
}

// Primary returns the derivative path of the job's first map.
func (j *Job) Primary() string {
	return filepath.Join(j.Pub.Dir, j.Pub.Name(j.Model.Outputs()[0].Map, ".nii.gz"))
}

// config returns the pipeline's settings for the job: the model's
// defaults, the automatic mask, the maps staged in a hidden folder beside
// the outputs.
func (j *Job) config(workers int, version string) *Config {
	c := j.Pub.Collection
	return &Config{Spec: fit.Spec{Model: j.Model.Name()}, Workers: workers,
		Out: filepath.Join(j.Pub.Dir, ".tauvox-"+c.Base.String()+"_"+c.Suffix), Force: true, NoPreview: true, Version: version,
		Hint:  " (the sidecars give the parameters)",
		Extra: map[string]any{"suffix": c.Suffix, "source": c.ID()}}
}

// Run loads, fits and writes the job's series through Run into the hidden
// work folder, then publishes the files under their BIDS names
// (bids.Publish; the provenance last). It returns the status counts.
func (j *Job) Run(ctx context.Context, workers int, version string) ([fit.NumStatus]int, error) {
	var counts [fit.NumStatus]int
	im, inputs, err := j.Pub.Collection.Load()
	if err != nil {
		return counts, err
	}
	cfg := j.config(workers, version)
	cfg.Image, cfg.Inputs = im, inputs
	sum, err := Run(ctx, cfg, nil)
	if err != nil {
		return counts, err
	}
	defer os.RemoveAll(cfg.Out)
	if err := bids.Publish(cfg.Out, &j.Pub, im, inputs); err != nil {
		return counts, err
	}
	return sum.Counts, nil
}

// Finished reports whether the job's outputs exist and its provenance
// records the same inputs (path relative to the dataset and SHA-256) and
// settings (the worker count aside: the maps do not depend on it);
// otherwise it says why not.
func (j *Job) Finished() (bool, string) {
	b, err := os.ReadFile(j.Pub.ProvenancePath())
	if err != nil {
		return false, "not fitted yet"
	}
	var p struct {
		Outputs  []string             `json:"outputs"`
		Settings map[string]any       `json:"settings"`
		Inputs   []mapset.InputRecord `json:"inputs"`
	}
	if err := json.Unmarshal(b, &p); err != nil {
		return false, "provenance unreadable"
	}
	for _, o := range p.Outputs {
		if _, err := os.Stat(filepath.Join(j.Pub.Dir, o)); err != nil {
			return false, "output " + o + " missing"
		}
	}
	if !sameSettings(p.Settings, j.config(0, "").Settings(j.Model, 0)) {
		return false, "settings changed"
	}
	want, err := j.inputRecords()
	if err != nil {
		return false, "inputs unreadable"
	}
	if len(want) != len(p.Inputs) {
		return false, "inputs changed"
	}
	for i, in := range p.Inputs {
		if rel(j.Root, in.Path) != rel(j.Root, want[i].Path) || in.SHA256 != want[i].SHA256 {
			return false, "inputs changed"
		}
	}
	return true, ""
}

// rel returns path relative to root when it lies inside, else path.
func rel(root, path string) string {
	r, err := filepath.Rel(root, path)
	if err != nil || strings.HasPrefix(r, "..") {
		return filepath.ToSlash(path)
	}
	return filepath.ToSlash(r)
}

// inputRecords lists the files a fit of the collection reads, in the
// order Load reads them, with checksums, without reading the images.
func (j *Job) inputRecords() ([]mapset.InputRecord, error) {
	var out []mapset.InputRecord
	seen := map[string]bool{}
	add := func(p, role string) error {
		if seen[p] {
			return nil
		}
		seen[p] = true
		sum, n, err := mapset.Checksum(p)
		if err != nil {
			return err
		}
		out = append(out, mapset.InputRecord{Path: p, Role: role, SHA256: sum, Bytes: n})
		return nil
	}
	c := j.Pub.Collection
	for _, f := range c.Files {
		if err := add(f.Path, "series"); err != nil {
			return nil, err
		}
		scs, err := bids.Sidecars(c.Root, f.Path)
		if err != nil {
			return nil, err
		}
		for _, s := range scs {
			if err := add(s, "sidecar"); err != nil {
				return nil, err
			}
		}
	}
	return out, nil
}

func sameSettings(a, b map[string]any) bool {
	norm := func(m map[string]any) string {
		c := map[string]any{}
		for k, v := range m {
			if k != "workers" {
				c[k] = v
			}
		}
		s, _ := json.Marshal(c)
		return string(s)
	}
	return norm(a) == norm(b)
}
