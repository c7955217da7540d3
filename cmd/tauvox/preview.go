package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/io/mapset"
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
	stems, err := folder.Choose(maps)
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
	if err := pipeline.Previews(ctx, folder, stems, out, win); err != nil {
		return err
	}
	if !quiet {
		fmt.Fprintf(e.stdout, "wrote %d preview%s into %s: %s\n", len(stems), map[bool]string{true: "", false: "s"}[len(stems) == 1], out, strings.Join(stems, ", "))
	}
	return nil
}
