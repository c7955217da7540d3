package pipeline

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"sync"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/preview"
	"github.com/tauvox/tauvox/volume"
)

// Previews draws a PNG montage of each map stem of folder into out.
func Previews(ctx context.Context, folder *mapset.Folder, stems []string, out string, win preview.Windows) error {
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
func drawPreviews(ctx context.Context, jobs []previewJob, out string, win preview.Windows, parallel int) error {
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

func drawPreview(j previewJob, out string, win preview.Windows) error {
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
		q, unit = MapQuantity(j.path, j.stem)
	} else if unit == "" {
		unit = preview.DefaultUnit(q)
	}
	if strings.HasSuffix(j.stem, "fitquality") {
		q, unit = "fraction", "R²" // R² of the fit, not the rate R2
	}
	if unit == "arbitrary" {
		unit = "a.u."
	}
	w := win.For(q, unit)
	if strings.HasSuffix(j.stem, "fitquality") {
		w = preview.Window{}
	}
	img, err := preview.Montage(im, &preview.Options{Quantity: q, Unit: unit, Window: w, Title: j.stem})
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
func fitPreviews(ctx context.Context, dir string, outs []fit.Param, win preview.Windows, inMemory map[string]*volume.Image) error {
	var jobs []previewJob
	if inMemory != nil {
		for _, p := range outs {
			if im := inMemory[p.Map]; im != nil {
				jobs = append(jobs, previewJob{stem: p.Map, path: filepath.Join(dir, p.Map+".nii.gz"), quantity: p.Name, unit: p.Unit, im: im})
			}
		}
		// Montages of maps up to 4 Mi voxels (16 MiB of pixels at one pixel
		// per voxel) are drawn all at once, beside the map files being
		// written: the scheduler then shares the CPUs among them to the
		// end (with one CPU's worth at a time, the last montage was drawn
		// alone while the other CPU idled). Larger ones, one at a time.
		parallel := len(jobs)
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

// MapQuantity returns the quantity and unit of a map from its sidecar
// (Quantity, Units), else from its name (T2map → T2, BIDS suffix last).
func MapQuantity(path, stem string) (string, string) {
	var meta struct{ Quantity, Units string }
	side := strings.TrimSuffix(strings.TrimSuffix(path, ".gz"), ".nii") + ".json"
	if b, err := os.ReadFile(side); err == nil && json.Unmarshal(b, &meta) == nil && meta.Quantity != "" {
		if meta.Units == "" {
			meta.Units = preview.DefaultUnit(meta.Quantity)
		}
		return meta.Quantity, meta.Units
	}
	q := stem
	if i := strings.LastIndexByte(q, '_'); i >= 0 && !strings.HasSuffix(q, "_sd") {
		q = q[i+1:]
	}
	q = strings.TrimSuffix(filepath.Base(q), "map")
	return q, preview.DefaultUnit(q)
}
