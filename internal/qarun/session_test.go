package qarun

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/tauvox/tauvox/roi/phantom"
)

// TestParseAcquired: the date-time forms of BIDS sidecars (RFC 3339, or
// without a zone, with or without fractions; common practice) and of our
// DICOM reader are read; anything else is refused.
func TestParseAcquired(t *testing.T) {
	want := time.Date(2026, 3, 4, 9, 5, 7, 0, time.UTC)
	for in, ok := range map[string]bool{
		"2026-03-04T09:05:07Z": true, "2026-03-04T09:05:07": true, "2026-03-04T09:05:07.250000": true,
		"2026-03-04T09:05": true, "2026-03-04": true, "04.03.2026": false, "": false, "2026-03-04 09:05": false,
	} {
		got, gotOK := parseAcquired(in)
		if gotOK != ok {
			t.Errorf("%q: ok %v, want %v", in, gotOK, ok)
			continue
		}
		if ok && got.Format("2006-01-02") != want.Format("2006-01-02") {
			t.Errorf("%q: %v", in, got)
		}
	}
}

// TestCSV: a vial without reference has empty reference, deviation and
// tolerance cells; a vial not measured keeps its reference but no
// deviation; NaN values are empty cells.
func TestCSV(t *testing.T) {
	nan := math.NaN()
	qa := &phantom.QA{Vials: []phantom.VialQA{
		{ID: "A1", Quantity: "T2", N: 40, Mean: 101.234, Median: 100.5, SD: 2, Failed: 0, Reference: 98, RefUncPct: 2, Deviation: 2.551, Tolerance: 4.9, Verdict: phantom.Pass},
		{ID: "A2", Quantity: "T2", N: 0, Mean: nan, Median: nan, SD: nan, Failed: 1, Reference: 50, Deviation: nan, Tolerance: 2.5, Verdict: phantom.NotMeasured, Note: "no voxel"},
		{ID: "A3", Quantity: "T1", N: 30, Mean: 900, Median: 901, SD: 9, Verdict: phantom.NotMeasured},
	}}
	lines := strings.Split(strings.TrimSpace(string(CSV(qa))), "\n")
	want := []string{
		"vial,quantity,n,mean_ms,median_ms,sd_ms,failed_fraction,reference_ms,reference_uncertainty_pct,deviation_pct,tolerance_ms,verdict,note",
		"A1,T2,40,101.23,100.50,2.00,0.000,98.00,2.00,2.55,4.90," + phantom.Pass + ",",
		"A2,T2,0,,,,1.000,50.00,0.00,,2.50," + phantom.NotMeasured + ",no voxel",
		"A3,T1,30,900.00,901.00,9.00,0.000,,0.00,,," + phantom.NotMeasured + ",",
	}
	if len(lines) != len(want) {
		t.Fatalf("%d lines:\n%s", len(lines), strings.Join(lines, "\n"))
	}
	for i := range want {
		if lines[i] != want[i] {
			t.Errorf("line %d:\n got %s\nwant %s", i, lines[i], want[i])
		}
	}
}

// TestInputsRefused: a file that is not a T1 or T2 map, a folder without
// maps and a missing path are refused, each naming the path.
func TestInputsRefused(t *testing.T) {
	dir := t.TempDir()
	other := filepath.Join(dir, "M0map.nii.gz")
	os.WriteFile(other, []byte("x"), 0o644)
	empty := filepath.Join(dir, "empty")
	os.Mkdir(empty, 0o755)
	for path, want := range map[string]string{
		other: "not a T1map or T2map file", empty: "holds no NIfTI map", filepath.Join(dir, "gone"): "gone",
	} {
		if _, _, err := Inputs(path); err == nil || !strings.Contains(err.Error(), want) || !strings.Contains(err.Error(), path) {
			t.Errorf("%s: %v, want …%s", path, err, want)
		}
	}
}
