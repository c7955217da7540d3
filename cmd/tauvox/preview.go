package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/preview"
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
	var stems []string
	if maps != "" {
		for _, s := range strings.Split(maps, ",") {
			s = strings.TrimSpace(s)
			if _, ok := folder.Maps[s]; !ok {
				return fmt.Errorf("%s: no map %q (have %s)", pos[0], s, strings.Join(folder.Stems(), ", "))
			}
			stems = append(stems, s)
		}
	} else {
		for _, s := range folder.Stems() {
			if !strings.HasSuffix(s, "_sd") && !strings.HasSuffix(s, "status") && !strings.Contains(s, "sd_") {
				stems = append(stems, s)
			}
		}
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
	for _, s := range stems {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		im, err := nifti.Read(folder.Maps[s])
		if err != nil {
			return err
		}
		if im.Dims[3] != 1 {
			return fmt.Errorf("%s: has %d volumes; a preview draws 3-D maps", folder.Maps[s], im.Dims[3])
		}
		q, unit := mapQuantity(folder.Maps[s], s)
		if strings.HasSuffix(s, "fitquality") {
			q, unit = "fraction", "R²" // R² of the fit, not the rate R2
		}
		if unit == "arbitrary" {
			unit = "a.u."
		}
		img, err := preview.Montage(im, &preview.Options{Quantity: q, Unit: unit, Window: win, Title: s})
		if err != nil {
			return fmt.Errorf("%s: %v", folder.Maps[s], err)
		}
		if err := preview.WritePNG(filepath.Join(out, s+".png"), img); err != nil {
			return err
		}
	}
	return nil
}

// fitPreviews writes the previews of a fit's parameter maps into the
// staged output folder dir (before it is committed): one PNG per model
// output, not the standard errors, fit quality or status.
func fitPreviews(ctx context.Context, dir string, outs []fit.Param, win preview.Window) error {
	folder, err := mapset.Open(dir)
	if err != nil {
		return err
	}
	var stems []string
	for _, p := range outs {
		if _, ok := folder.Maps[p.Map]; ok {
			stems = append(stems, p.Map)
		}
	}
	return writePreviews(ctx, folder, stems, dir, win)
}
