package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strings"
	"sync"
	"time"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/internal/cli"
	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/io/bids"
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

Names: every output of one series carries desc-<SUFFIX>:
<source>_desc-MESE_T2map.nii.gz (R2map, M0map, T1map, inveff, fitquality,
status alike), <source>_desc-MESEsd_T2map (a standard error appends sd to
the label), <source>_desc-MESE_provenance.json; <source> is the series'
name without echo-/inv-/flip-/part-. Times are in ms (Units).

Resumable: a series whose provenance records the same input checksums and
settings is skipped; otherwise (or with --force) it is fitted again. --jobs
series are fitted at a time, sharing --workers goroutines; the maps do not
depend on either. Exit code 1 when some series failed (each named on
stderr), 2 for bad usage or a folder that is not a BIDS dataset.`

type batchArgs struct {
	root, out               string
	models, participants    cli.Multi
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
	var slurm bids.SlurmOptions
	script := fs.String("slurm-script", "", "write a SLURM array script (one task per participant of participants.tsv) to FILE and fit nothing")
	fs.IntVar(&slurm.CPUs, "slurm-cpus", 4, "CPUs per SLURM task (its --workers)")
	fs.StringVar(&slurm.Mem, "slurm-mem", "4G", "memory per SLURM task")
	fs.StringVar(&slurm.Time, "slurm-time", "01:00:00", "time limit per SLURM task")
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
	case fit.CheckWorkers(a.workers) != nil:
		return fit.CheckWorkers(a.workers)
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
	if *script != "" {
		slurm.Out, slurm.Models = a.out, a.models
		if exe, err := os.Executable(); err == nil {
			slurm.Tauvox = exe
		}
		n, err := bids.WriteSlurmScript(*script, a.root, &slurm, a.force)
		if err == nil {
			fmt.Fprintf(e.stdout, "wrote %s: %d array tasks; submit it with: sbatch %s\n", *script, n, *script)
		}
		return err
	}
	return batch(ctx, &a, e)
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
	jobs, err := pipeline.Plan(ds, a.out, a.modelOf)
	if err != nil {
		return err
	}
	if a.dryRun {
		for _, j := range jobs {
			state := "fit"
			if !a.force {
				if ok, why := j.Finished(); ok {
					state = "finished, skip"
				} else {
					state = "fit (" + why + ")"
				}
			}
			c := j.Pub.Collection
			fmt.Fprintf(e.stdout, "%s\t%s\t%d files\t%s → %s\n", c.ID(), j.Model.Name(), len(c.Files), state, j.Primary())
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
		go func(j *pipeline.Job) {
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

func (a *batchArgs) runJob(ctx context.Context, j *pipeline.Job, workers int, e *env) {
	id := j.Pub.Collection.ID()
	if !a.force {
		if ok, _ := j.Finished(); ok {
			a.mu.Lock()
			a.skipped++
			a.mu.Unlock()
			a.say(e, false, "%s: up to date (provenance matches), skipped", id)
			return
		}
	}
	t0 := time.Now()
	counts, err := j.Run(ctx, workers, version())
	a.mu.Lock()
	if err != nil {
		a.failed++
	} else {
		a.fitted++
	}
	a.mu.Unlock()
	if err != nil {
		if ctx.Err() == nil {
			a.say(e, true, "%s: %s", id, oneLine(err.Error()))
		}
		return
	}
	a.say(e, false, "%s: %s/%s → %s (%s; %.2f s)", id, j.Model.Name(), j.Model.Method(), j.Primary(), statusLine(counts), time.Since(t0).Seconds())
}
