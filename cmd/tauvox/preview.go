package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/tauvox/tauvox/internal/cli"
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

The display window is the 1st to 99th percentile of each map unless --range
gives one: --range T2=0,300 for the maps of one quantity (repeat the flag
for others), a bare --range 0,300 for every map in ms; the other maps keep
their automatic windows. By default every map except the standard errors
(_sd) and status is drawn. The previews a fit drew in MAPS_DIR are replaced;
existing PNGs in another --out folder only with --force.`

// rangeUsage describes the --range flag of fit and preview.
const rangeUsage = "display window QUANTITY=LO,HI (e.g. T2=0,300; repeatable), or LO,HI for every map in ms (default 1st–99th percentile)"

func runPreview(ctx context.Context, args []string, e *env) error {
	var ranges cli.Repeat
	var out, maps string
	var force, quiet bool
	fs := newFlags("preview", "MAPS_DIR [--range QUANTITY=LO,HI] [--out DIR] [--maps LIST]", previewSummary, e)
	fs.Var(&ranges, "range", rangeUsage)
	fs.StringVar(&out, "out", "", "folder for the PNG files (default MAPS_DIR)")
	fs.StringVar(&maps, "maps", "", "comma list of map stems to draw (default: all but *_sd and status)")
	fs.BoolVar(&force, "force", false, "replace existing PNG files in another --out folder")
	fs.BoolVar(&quiet, "quiet", false, "print nothing on success")
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
		return err
	}
	if len(pos) != 1 {
		return fmt.Errorf("give exactly one MAPS_DIR (see --help)")
	}
	win, err := preview.ParseWindows(ranges)
	if err != nil {
		return fmt.Errorf("--range: %v", err)
	}
	folder, err := mapset.Open(pos[0])
	if err != nil {
		return err
	}
	stems, err := folder.Choose(maps)
	if err != nil {
		return err
	}
	own := out == ""
	if own {
		out = pos[0]
	}
	if err := os.MkdirAll(out, 0o755); err != nil {
		return err
	}
	if !force && !own {
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
