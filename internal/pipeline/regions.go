package pipeline

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"strings"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/roi"
	"github.com/tauvox/tauvox/volume"
)

// RegionRow is one region × map result of RegionStats. Statistics that
// are not defined (no usable voxel) are null in JSON.
type RegionRow struct {
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

// RegionStats computes the statistics of each map inside each region:
// maps are map files or fit output folders (mapset.ReadMaps), rois a
// region list (.csv or .json, roi.ReadList) or a NIfTI label image
// (.nii, .nii.gz, roi.Labels), and every region is shrunk by erode mm. It
// returns one row per region × map, map by map, and the number of maps.
func RegionStats(maps []string, rois string, erode float64) ([]RegionRow, int, error) {
	ms, err := mapset.ReadMaps(maps)
	if err != nil {
		return nil, 0, err
	}
	var specs []roi.Spec
	var labels *volume.Image
	if strings.HasSuffix(rois, ".nii") || strings.HasSuffix(rois, ".nii.gz") {
		if labels, err = nifti.Read(rois); err != nil {
			return nil, 0, err
		}
	} else if specs, err = roi.ReadList(rois); err != nil {
		return nil, 0, err
	}
	var rows []RegionRow
	var scratch []float64
	for _, m := range ms {
		var regs []roi.Region
		if labels != nil {
			regs, err = roi.Labels(m.Image, labels, erode)
		} else {
			regs, err = roi.Spheres(m.Image, specs, erode)
		}
		if err != nil {
			return nil, 0, fmt.Errorf("%s: %v", rois, err)
		}
		for _, r := range regs {
			var s roi.Stats
			s, scratch = roi.Summarise(m.Image.Data, m.Status, r.Index, scratch)
			rows = append(rows, RegionRow{Region: r.Name, Map: m.Name, Unit: m.Unit, Stats: s, N: s.N, Voxels: s.Voxels,
				Mean: finite(s.Mean), SD: finite(s.SD), Median: finite(s.Median), Q1: finite(s.Q1), Q3: finite(s.Q3), IQR: finite(s.IQR()),
				Min: finite(s.Min), Max: finite(s.Max), CoV: finite(s.CoV), Failed: s.Failed})
		}
	}
	return rows, len(ms), nil
}

// finite returns a pointer to v, or nil when v is NaN.
func finite(v float64) *float64 {
	if v != v {
		return nil
	}
	return &v
}

// RegionJSON renders rows as an indented JSON list.
func RegionJSON(rows []RegionRow) []byte {
	b, _ := json.MarshalIndent(rows, "", "  ")
	return append(b, '\n')
}

// RegionCSV renders rows as CSV with a header line.
func RegionCSV(rows []RegionRow) []byte {
	num := output.Num
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	w.Write([]string{"region", "map", "unit", "n", "voxels", "mean", "sd", "median", "q1", "q3", "iqr", "min", "max", "cov", "failed_fraction"})
	for _, r := range rows {
		s := r.Stats
		w.Write([]string{r.Region, r.Map, r.Unit, fmt.Sprint(s.N), fmt.Sprint(s.Voxels), num(s.Mean, 4), num(s.SD, 4),
			num(s.Median, 4), num(s.Q1, 4), num(s.Q3, 4), num(s.IQR(), 4), num(s.Min, 4), num(s.Max, 4),
			num(s.CoV, 5), num(s.Failed, 4)})
	}
	w.Flush()
	return b.Bytes()
}
