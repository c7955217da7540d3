package main

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strings"
	"sync"
	"time"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/io/bids"
	"github.com/tauvox/tauvox/io/mapset"
)

const batchSummary = `Fits every relaxometry series of a BIDS dataset and writes the maps as a
BIDS derivative dataset into DERIV_DIR (dataset_description.json with
DatasetType "derivative"; sub-<label>/[ses-<label>/]anat/ per series).

Series: the file collections MESE (t2), MEGRE (t2star), IRT1 (t1-ir) and
VFA (t1-vfa): one 3-D file per echo, inversion or flip angle, linked by
echo-/inv-/flip- and stacked in index order, the values from each file's
sidecar (BIDS inheritance applies), or one 4-D file listing them. Only
part-mag (or no part) is fitted. --model SUFFIX=MODEL changes a suffix's
model (or adds a suffix); MODEL "skip" leaves the suffix out.

Names: <source>_T2map.nii.gz (T1map, T2starmap, R1map, R2map, R2starmap
alike), <source>_desc-sd_T2map (standard error), and for the other outputs
<source>_desc-<SUFFIX>_M0map, _desc-<SUFFIX>_fitquality,
_desc-<SUFFIX>_status, _desc-<SUFFIX>_provenance.json; <source> is the
series' name without echo-/inv-/flip-/part-. Times are in ms (Units).

Resumable: a series whose provenance records the same input checksums and
settings is skipped; otherwise (or with --force) it is fitted again. --jobs
series are fitted at a time, sharing --workers goroutines; the maps do not
depend on either. Exit code 1 when some series failed (each named on
stderr), 2 for bad usage or a folder that is not a BIDS dataset.`

// multiFlag collects a repeatable flag whose values may also be
// comma-separated lists.
type multiFlag []string

func (m *multiFlag) String() string { return strings.Join(*m, ",") }
func (m *multiFlag) Set(s string) error {
	for _, v := range strings.Split(s, ",") {
		if v = strings.TrimSpace(v); v != "" {
			*m = append(*m, v)
		}
	}
	return nil
}

type batchArgs struct {
	root, out               string
	models, participants    multiFlag
	jobs, workers           int
	force, dryRun, quiet    bool
	modelOf                 map[string]string
	started                 time.Time
	mu                      sync.Mutex
	fitted, skipped, failed int
}

func runBatch(ctx context.Context, args []string, e *env) error {
	var a batchArgs
	fs := newFlags("batch", "BIDS_DIR --out DERIV_DIR [options]", batchSummary, e)
	fs.StringVar(&a.out, "out", "", "derivative dataset folder (required; created when missing)")
	fs.Var(&a.models, "model", "SUFFIX=MODEL: the model of a suffix (repeatable), e.g. MEGRE=t2star, VFA=skip")
	fs.Var(&a.participants, "participant-label", "fit only these participants (repeatable or a comma list; with or without \"sub-\")")
	fs.IntVar(&a.jobs, "jobs", 1, "series fitted at a time")
	fs.IntVar(&a.workers, "workers", 0, "worker goroutines shared by the jobs (default: one per CPU)")
	fs.BoolVar(&a.force, "force", false, "fit every series again, even those already finished")
	fs.BoolVar(&a.dryRun, "dry-run", false, "list the series and what would be done, fit nothing")
	fs.BoolVar(&a.quiet, "quiet", false, "print only failures and the summary")
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
		return err
	}
	switch {
	case len(pos) != 1:
		return fmt.Errorf("give exactly one BIDS_DIR (see --help)")
	case a.out == "":
		return fmt.Errorf("--out is required (see --help)")
	case a.jobs < 1:
		return fmt.Errorf("--jobs must be at least 1")
	case a.workers < 0:
		return fmt.Errorf("--workers must be positive")
	}
	a.root = pos[0]
	a.modelOf = map[string]string{}
	for s, m := range fit.DefaultSuffixes() {
		a.modelOf[s] = m
	}
	for _, kv := range a.models {
		s, m, ok := strings.Cut(kv, "=")
		if !ok || s == "" || m == "" {
			return fmt.Errorf("--model %q: want SUFFIX=MODEL, e.g. MEGRE=t2star", kv)
		}
		if m == "skip" {
			delete(a.modelOf, s)
			continue
		}
		if _, err := fit.New(fit.Spec{Model: m}); err != nil {
			return fmt.Errorf("--model %s: %v", kv, err)
		}
		a.modelOf[s] = m
	}
	if abs, err := filepath.Abs(a.out); err == nil {
		if rootAbs, err := filepath.Abs(a.root); err == nil && abs == rootAbs {
			return fmt.Errorf("--out %s is the raw dataset itself; give a derivative folder such as %s", a.out, filepath.Join(a.root, "derivatives", "tauvox"))
		}
	}
	return batch(ctx, &a, e)
}

// batchJob is one series of the plan.
type batchJob struct {
	pub   bids.Publication
	c     *bids.Collection
	model fit.Model
}

func (j *batchJob) name(stem, ext string) string { return j.pub.Name(stem, ext) }

// stems returns the output stems of a fit with the model, as the
// pipeline names them.
func stems(m fit.Model) []string {
	var s []string
	for _, p := range m.Outputs() {
		s = append(s, p.Map, p.Map+"_sd")
	}
	return append(s, "fitquality", "status")
}

func batch(ctx context.Context, a *batchArgs, e *env) error {
	var suffixes []string
	for s := range a.modelOf {
		suffixes = append(suffixes, s)
	}
	sort.Strings(suffixes)
	ds, err := bids.Scan(a.root, &bids.ScanOptions{Suffixes: suffixes, Participants: a.participants})
	if err != nil {
		return err
	}
	for _, n := range ds.Notes {
		fmt.Fprintln(e.stderr, "tauvox batch: note: "+n)
	}
	if len(ds.Collections) == 0 {
		return fmt.Errorf("%s: no %s series found", a.root, strings.Join(suffixes, ", "))
	}
	if err := bids.CheckDerivative(a.out); err != nil {
		return err
	}
	// Plan: one job per collection; relaxometry maps that two series of
	// one folder would both write get desc-<SUFFIX>.
	var jobs []*batchJob
	claims := map[string][]*batchJob{}
	for _, c := range ds.Collections {
		m, err := fit.New(fit.Spec{Model: a.modelOf[c.Suffix]})
		if err != nil {
			return err
		}
		info, _ := fit.Lookup(m.Name())
		j := &batchJob{c: c, model: m, pub: bids.Publication{Collection: c, Dir: filepath.Join(a.out, filepath.FromSlash(c.Dir)),
			Stems: stems(m), Reference: info.Reference}}
		jobs = append(jobs, j)
		for _, s := range stems(m) {
			if bids.IsQuantityMap(s) {
				k := filepath.Join(j.pub.Dir, j.name(s, ""))
				claims[k] = append(claims[k], j)
			}
		}
	}
	for _, js := range claims {
		if len(js) > 1 {
			for _, j := range js {
				j.pub.Labelled = true
			}
		}
	}
	if a.dryRun {
		for _, j := range jobs {
			state := "fit"
			if !a.force {
				if ok, why := j.finished(a); ok {
					state = "finished, skip"
				} else {
					state = "fit (" + why + ")"
				}
			}
			fmt.Fprintf(e.stdout, "%s\t%s\t%d files\t%s → %s\n", j.c.ID(), j.model.Name(), len(j.c.Files), state, filepath.Join(j.pub.Dir, j.name(j.primary(), ".nii.gz")))
		}
		return nil
	}
	if err := bids.WriteDescription(a.out, a.root, version()); err != nil {
		return err
	}
	total := a.workers
	if total == 0 {
		total = runtime.NumCPU()
	}
	per := max(1, total/a.jobs)
	a.started = time.Now()
	sem := make(chan struct{}, a.jobs)
	var wg sync.WaitGroup
	for _, j := range jobs {
		if ctx.Err() != nil {
			break
		}
		wg.Add(1)
		sem <- struct{}{}
		go func(j *batchJob) {
			defer func() { <-sem; wg.Done() }()
			a.runJob(ctx, j, per, e)
		}(j)
	}
	wg.Wait()
	if ctx.Err() != nil {
		return ctx.Err()
	}
	fmt.Fprintf(e.stdout, "batch %s → %s: %d fitted, %d up to date, %d failed (%d workers in %d job%s, %.1f s)\n",
		a.root, a.out, a.fitted, a.skipped, a.failed, per*min(a.jobs, len(jobs)), min(a.jobs, len(jobs)),
		map[bool]string{true: "", false: "s"}[min(a.jobs, len(jobs)) == 1], time.Since(a.started).Seconds())
	if a.failed > 0 {
		return &exitError{code: 1, err: fmt.Errorf("%d of %d series failed", a.failed, len(jobs))}
	}
	return nil
}

// primary returns the stem of the first output of the job's model.
func (j *batchJob) primary() string {
	return j.model.Outputs()[0].Map
}

func (a *batchArgs) say(e *env, failed bool, format string, args ...any) {
	a.mu.Lock()
	defer a.mu.Unlock()
	if failed {
		fmt.Fprintf(e.stderr, "tauvox batch: "+format+"\n", args...)
		return
	}
	if !a.quiet {
		fmt.Fprintf(e.stdout, format+"\n", args...)
	}
}

func (a *batchArgs) runJob(ctx context.Context, j *batchJob, workers int, e *env) {
	if !a.force {
		if ok, _ := j.finished(a); ok {
			a.mu.Lock()
			a.skipped++
			a.mu.Unlock()
			a.say(e, false, "%s: up to date (provenance matches), skipped", j.c.ID())
			return
		}
	}
	t0 := time.Now()
	counts, err := a.fitJob(ctx, j, workers)
	a.mu.Lock()
	if err != nil {
		a.failed++
	} else {
		a.fitted++
	}
	a.mu.Unlock()
	if err != nil {
		if ctx.Err() == nil {
			a.say(e, true, "%s: %s", j.c.ID(), oneLine(err.Error()))
		}
		return
	}
	a.say(e, false, "%s: %s/%s → %s (%s; %.2f s)", j.c.ID(), j.model.Name(), j.model.Method(),
		filepath.Join(j.pub.Dir, j.name(j.primary(), ".nii.gz")), statusLine(counts), time.Since(t0).Seconds())
}

// config returns the pipeline's settings for the job: the model's
// defaults, the automatic mask, and where the maps are staged.
func (j *batchJob) config(workers int) *pipeline.Config {
	return &pipeline.Config{Series: "", Spec: fit.Spec{Model: j.model.Name()}, Workers: workers,
		Out: j.workDir(), Force: true, NoPreview: true, Version: version(),
		Hint:  " (the sidecars give the parameters)",
		Extra: map[string]any{"suffix": j.c.Suffix, "source": j.c.ID(), "labelled": j.pub.Labelled}}
}

// workDir is the hidden folder beside the outputs where the maps are
// written before Publish gives them their BIDS names.
func (j *batchJob) workDir() string {
	return filepath.Join(j.pub.Dir, ".tauvox-"+j.c.Base.String()+"_"+j.c.Suffix)
}

// batchProvenance is the part of a published provenance that resuming
// compares.
type batchProvenance struct {
	Outputs  []string             `json:"outputs"`
	Settings map[string]any       `json:"settings"`
	Inputs   []mapset.InputRecord `json:"inputs"`
}

// finished reports whether the series' outputs exist and its provenance
// records the same inputs (path relative to the dataset and SHA-256) and
// settings; otherwise it says why not.
func (j *batchJob) finished(a *batchArgs) (bool, string) {
	b, err := os.ReadFile(j.pub.ProvenancePath())
	if err != nil {
		return false, "not fitted yet"
	}
	var p batchProvenance
	if err := json.Unmarshal(b, &p); err != nil {
		return false, "provenance unreadable"
	}
	for _, o := range p.Outputs {
		if _, err := os.Stat(filepath.Join(j.pub.Dir, o)); err != nil {
			return false, "output " + o + " missing"
		}
	}
	if !sameSettings(p.Settings, j.config(0).Settings(j.model, 0)) {
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
		if rel(a.root, in.Path) != rel(a.root, want[i].Path) || in.SHA256 != want[i].SHA256 {
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
func (j *batchJob) inputRecords() ([]mapset.InputRecord, error) {
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
	for _, f := range j.c.Files {
		if err := add(f.Path, "series"); err != nil {
			return nil, err
		}
		scs, err := bids.Sidecars(j.c.Root, f.Path)
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

// fitJob loads, fits and writes one series through the pipeline into a
// hidden work folder beside the outputs, then publishes the files under
// their BIDS names (bids.Publish; the provenance last).
func (a *batchArgs) fitJob(ctx context.Context, j *batchJob, workers int) ([fit.NumStatus]int, error) {
	var counts [fit.NumStatus]int
	im, inputs, err := j.c.Load()
	if err != nil {
		return counts, err
	}
	cfg := j.config(workers)
	cfg.Image, cfg.Inputs = im, inputs
	sum, err := pipeline.Run(ctx, cfg, nil)
	if err != nil {
		return counts, err
	}
	defer os.RemoveAll(cfg.Out)
	if err := bids.Publish(cfg.Out, &j.pub, im, inputs); err != nil {
		return counts, err
	}
	return sum.Counts, nil
}
