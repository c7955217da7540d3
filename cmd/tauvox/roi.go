package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"strings"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/roi"
	"github.com/tauvox/tauvox/volume"
)

// roiRow is one region × map result.
type roiRow struct {
	Region string    `json:"region"`
	Map    string    `json:"map"`
	Unit   string    `json:"unit"`
	Stats  roi.Stats `json:"-"`
	N      int       `json:"n"`
	Voxels int       `json:"voxels"`
	Mean   *float64  `json:"mean"`
	SD     *float64  `json:"sd"`
	Median *float64  `json:"median"`
	Q1     *float64  `json:"q1"`
	Q3     *float64  `json:"q3"`
	IQR    *float64  `json:"iqr"`
	Min    *float64  `json:"min"`
	Max    *float64  `json:"max"`
	CoV    *float64  `json:"cov"`
	Failed float64   `json:"failed_fraction"`
}

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
	maps, err := mapset.ReadMaps(pos)
	if err != nil {
		return err
	}
	var specs []roi.Spec
	var labels *volume.Image
	if strings.HasSuffix(rois, ".nii") || strings.HasSuffix(rois, ".nii.gz") {
		if labels, err = nifti.Read(rois); err != nil {
			return err
		}
	} else if specs, err = roi.ReadList(rois); err != nil {
		return err
	}
	var rows []roiRow
	var scratch []float64
	for _, m := range maps {
		var regs []roi.Region
		if labels != nil {
			regs, err = roi.Labels(m.Image, labels, erode)
		} else {
			regs, err = roi.Spheres(m.Image, specs, erode)
		}
		if err != nil {
			return fmt.Errorf("%s: %v", rois, err)
		}
		for _, r := range regs {
			var s roi.Stats
			s, scratch = roi.Summarise(m.Image.Data, m.Status, r.Index, scratch)
			rows = append(rows, newROIRow(r.Name, m, s))
		}
	}
	var b []byte
	if asJSON {
		b, _ = json.MarshalIndent(rows, "", "  ")
		b = append(b, '\n')
	} else {
		b = roiCSV(rows)
	}
	if err := output.WriteFile(out, b); err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "wrote %s: %d regions × %d maps\n", out, len(rows)/max(1, len(maps)), len(maps))
	return nil
}

func ptr(v float64) *float64 {
	if v != v { // NaN
		return nil
	}
	return &v
}

func newROIRow(region string, m mapset.Map, s roi.Stats) roiRow {
	return roiRow{Region: region, Map: m.Name, Unit: m.Unit, Stats: s, N: s.N, Voxels: s.Voxels,
		Mean: ptr(s.Mean), SD: ptr(s.SD), Median: ptr(s.Median), Q1: ptr(s.Q1), Q3: ptr(s.Q3), IQR: ptr(s.IQR()),
		Min: ptr(s.Min), Max: ptr(s.Max), CoV: ptr(s.CoV), Failed: s.Failed}
}

func roiCSV(rows []roiRow) []byte {
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	w.Write([]string{"region", "map", "unit", "n", "voxels", "mean", "sd", "median", "q1", "q3", "iqr", "min", "max", "cov", "failed_fraction"})
	for _, r := range rows {
		s := r.Stats
		w.Write([]string{r.Region, r.Map, r.Unit, fmt.Sprint(s.N), fmt.Sprint(s.Voxels), fmtNum(s.Mean, 4), fmtNum(s.SD, 4),
			fmtNum(s.Median, 4), fmtNum(s.Q1, 4), fmtNum(s.Q3, 4), fmtNum(s.IQR(), 4), fmtNum(s.Min, 4), fmtNum(s.Max, 4),
			fmtNum(s.CoV, 5), fmtNum(s.Failed, 4)})
	}
	w.Flush()
	return b.Bytes()
}
