package main

import (
	"context"
	"errors"
	"fmt"
	"os"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/io/mapset"
)

func runROI(_ context.Context, args []string, e *env) error {
	var rois, out string
	var erode float64
	var asJSON, force bool
	fs := newFlags("roi", "MAPS... --rois FILE --out stats.csv [--json] [--erode MM]",
		`Computes statistics of each map inside each region: n, mean, SD, median,
quartiles and IQR, min, max, CoV and the fraction of failed fits (NaN values,
or a non-zero status when the map sits in a fit output folder). MAPS are map
files or fit output folders (every parameter map in them; standard-error maps
are included, status and fitquality are not). Regions: a region list (CSV
with header name,x,y,z,radius,space — space mm (scanner RAS) or voxel
(0-based i,j,k) — or the same as a JSON list) or a NIfTI label image (each
positive integer a region; resampled by nearest neighbour when its grid
differs). One CSV row per region × map, with a unit column.`, e)
	fs.StringVar(&rois, "rois", "", "region list (.csv, .json) or label image (.nii, .nii.gz) (required)")
	fs.StringVar(&out, "out", "", "output CSV file (required; refused if it exists, see --force)")
	fs.Float64Var(&erode, "erode", 0, "shrink every region by this many mm (away from walls)")
	fs.BoolVar(&asJSON, "json", false, "write JSON instead of CSV")
	fs.BoolVar(&force, "force", false, "replace an existing output file")
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
		return err
	}
	switch {
	case len(pos) == 0:
		return errors.New("give at least one map or fit output folder (see --help)")
	case rois == "" || out == "":
		return errors.New("--rois and --out are required (see --help)")
	case erode < 0:
		return errors.New("--erode must not be negative")
	}
	if err := checkOutput(out, append([]string{rois}, pos...)...); err != nil {
		return err
	}
	if _, err := os.Stat(out); err == nil && !force {
		return fmt.Errorf("%s: %w", out, mapset.ErrExists)
	}
	rows, nmaps, err := pipeline.RegionStats(pos, rois, erode)
	if err != nil {
		return err
	}
	encode := pipeline.RegionCSV
	if asJSON {
		encode = pipeline.RegionJSON
	}
	if err := output.WriteFile(out, encode(rows)); err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "wrote %s: %d regions × %d maps\n", out, len(rows)/max(1, nmaps), nmaps)
	return nil
}
