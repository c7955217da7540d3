package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"sync"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/preview"
	"github.com/tauvox/tauvox/io/volume"
)

const previewSummary = `Writes a PNG montage of every slice of each map of a fit output folder (or
a BIDS derivative folder): <map>.png beside the maps, or in --out DIR. Each
quantity has its own perceptually uniform colour table (T1/R1 plasma,
T2/T2*/R2/R2* viridis, rates reversed, fractions cividis, others grey), a
colour bar labelled with the unit, and voxels without a value (failed or
masked fits, NaN) in black, apart from the darkest valid colour.

The display window is the 1st to 99th percentile of each map unless
--range LO,HI gives one (for every map written; choose them with --maps).
By default every map except the standard errors (_sd) and status is drawn.
Existing PNGs are replaced only with --force.`

func runPreview(ctx context.Context, args []string, e *env) error {
	var rangeS, out, maps string
	var force, quiet bool
	fs := newFlags("preview", "MAPS_DIR [--range LO,HI] [--out DIR] [--maps LIST]", previewSummary, e)
	fs.StringVar(&rangeS, "range", "", "display window LO,HI in the map's unit (default 1st–99th percentile)")
	fs.StringVar(&out, "out", "", "folder for the PNG files (default MAPS_DIR)")
	fs.StringVar(&maps, "maps", "", "comma list of map stems to draw (default: all but *_sd and status)")
	fs.BoolVar(&force, "force", false, "replace existing PNG files")
	fs.BoolVar(&quiet, "quiet", false, "print nothing on success")
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
		return err
	}
	if len(pos) != 1 {
		return fmt.Errorf("give exactly one MAPS_DIR (see --help)")
	}
	var win preview.Window
	if rangeS != "" {
		w, err := preview.ParseWindow(rangeS)
		if err != nil {
			return fmt.Errorf("--range: %v", err)
		}
		win = w
	}
	folder, err := mapset.Open(pos[0])
	if err != nil {
		return err
	}
	stems, err := chooseMaps(folder, pos[0], maps)
	if err != nil {
		return err
	}
	if out == "" {
		out = pos[0]
	}
	if err := os.MkdirAll(out, 0o755); err != nil {
		return err
	}
	if !force {
		for _, s := range stems {
			p := filepath.Join(out, s+".png")
			if _, err := os.Stat(p); err == nil {
				return fmt.Errorf("%s: %v", p, mapset.ErrExists)
			}
		}
	}
	if err := writePreviews(ctx, folder, stems, out, win); err != nil {
		return err
	}
	if !quiet {
		fmt.Fprintf(e.stdout, "wrote %d preview%s into %s: %s\n", len(stems), map[bool]string{true: "", false: "s"}[len(stems) == 1], out, strings.Join(stems, ", "))
	}
	return nil
}

// writePreviews draws a PNG montage of each map stem of folder into out.
func writePreviews(ctx context.Context, folder *mapset.Folder, stems []string, out string, win preview.Window) error {
	jobs := make([]previewJob, len(stems))
	for i, s := range stems {
		jobs[i] = previewJob{stem: s, path: folder.Maps[s]}
	}
	return drawPreviews(ctx, jobs, out, win, 1)
}

// previewJob is one map to draw: its stem and file, and its samples when
// the fit still holds them (nil: read from the file). quantity and unit,
// when quantity is set, are those of the map's sidecar (the fit's
// parameter), which then need not exist yet.
type previewJob struct {
	stem, path     string
	quantity, unit string
	im             *volume.Image
}

// drawPreviews draws the jobs' montages into out, up to parallel at once
// (maps read from files are drawn one at a time: a map and its montage of
// a large series take hundreds of megabytes). It returns the first error
// (in job order).
func drawPreviews(ctx context.Context, jobs []previewJob, out string, win preview.Window, parallel int) error {
	errs := make([]error, len(jobs))
	sem := make(chan struct{}, max(parallel, 1))
	var wg sync.WaitGroup
	for i, j := range jobs {
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer func() { <-sem; wg.Done() }()
			if ctx.Err() != nil {
				errs[i] = ctx.Err()
				return
			}
			errs[i] = drawPreview(j, out, win)
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

func drawPreview(j previewJob, out string, win preview.Window) error {
	im := j.im
	if im == nil {
		var err error
		if im, err = nifti.Read(j.path); err != nil {
			return err
		}
	}
	if im.Dims[3] != 1 {
		return fmt.Errorf("%s: has %d volumes; a preview draws 3-D maps", j.path, im.Dims[3])
	}
	q, unit := j.quantity, j.unit
	if q == "" {
		q, unit = mapQuantity(j.path, j.stem)
	} else if unit == "" {
		unit = preview.DefaultUnit(q)
	}
	if strings.HasSuffix(j.stem, "fitquality") {
		q, unit = "fraction", "R²" // R² of the fit, not the rate R2
	}
	if unit == "arbitrary" {
		unit = "a.u."
	}
	img, err := preview.Montage(im, &preview.Options{Quantity: q, Unit: unit, Window: win, Title: j.stem})
	if err != nil {
		return fmt.Errorf("%s: %v", j.path, err)
	}
	return preview.WritePNG(filepath.Join(out, j.stem+".png"), img)
}

// fitPreviews writes the previews of a fit's parameter maps into the
// staged output folder dir: one PNG per model output, not the standard
// errors, fit quality or status. With inMemory (the whole maps of the fit
// by stem, for a fit of one slab) it draws them from memory and may run
// while the map files are still being written; otherwise it reads the
// files, which must be complete.
func fitPreviews(ctx context.Context, dir string, outs []fit.Param, win preview.Window, inMemory map[string]*volume.Image) error {
	var jobs []previewJob
	if inMemory != nil {
		for _, p := range outs {
			if im := inMemory[p.Map]; im != nil {
				jobs = append(jobs, previewJob{stem: p.Map, path: filepath.Join(dir, p.Map+".nii.gz"), quantity: p.Name, unit: p.Unit, im: im})
			}
		}
		// Montages of maps up to 4 Mi voxels (16 MiB of pixels at one pixel
		// per voxel) are drawn in parallel; larger ones one at a time.
		parallel := runtime.GOMAXPROCS(0)
		if len(jobs) > 0 && jobs[0].im.Voxels() > 1<<22 {
			parallel = 1
		}
		return drawPreviews(ctx, jobs, dir, win, parallel)
	}
	folder, err := mapset.Open(dir)
	if err != nil {
		return err
	}
	for _, p := range outs {
		if path, ok := folder.Maps[p.Map]; ok {
			jobs = append(jobs, previewJob{stem: p.Map, path: path})
		}
	}
	return drawPreviews(ctx, jobs, dir, win, 1)
}
