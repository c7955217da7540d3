package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/io/nifti"
)

// TestConvertProtocol: the inversion recovery protocol joined from seven
// series (--series 3,...,9) is written as one 8×8×3×7 NIfTI on nibabel's
// grid (affine to 1e-3 mm, float32 header) with a BIDS sidecar giving
// InversionTime in seconds (BIDS: times in s); fitting the NIfTI gives the
// map of fitting the DICOM folder (to 1e-5 relative: the times pass
// through seconds). An existing output is refused without --force, and
// one inside the input folder always.
func TestConvertProtocol(t *testing.T) {
	_, affines := protocolRefs(t)
	out := filepath.Join(t.TempDir(), "ir.nii.gz")
	code, stdout, stderr := tauvox(t, "convert", "../../testdata/dicom/protocols", "--series", "3,4,5,6,7,8,9", "--out", out)
	if code != 0 {
		t.Fatal(stderr)
	}
	if !strings.Contains(stdout, "8×8×3, 7 volumes") {
		t.Errorf("stdout %q", stdout)
	}
	im, err := nifti.Read(out)
	if err != nil {
		t.Fatal(err)
	}
	if im.Dims != [4]int{8, 8, 3, 7} {
		t.Fatalf("dims %v", im.Dims)
	}
	for r := 0; r < 3; r++ {
		for c := 0; c < 4; c++ {
			if d := math.Abs(im.Affine[r][c] - affines["t1-ir"][r][c]); d > 1e-3 {
				t.Errorf("affine[%d][%d] = %.6g, nibabel %.6g", r, c, im.Affine[r][c], affines["t1-ir"][r][c])
			}
		}
	}
	b, err := os.ReadFile(strings.TrimSuffix(out, ".nii.gz") + ".json")
	if err != nil {
		t.Fatal(err)
	}
	var side struct {
		InversionTime  []float64
		RepetitionTime float64
		EchoTime       float64
	}
	if err := json.Unmarshal(b, &side); err != nil {
		t.Fatal(err)
	}
	want := []float64{0.05, 0.15, 0.3, 0.6, 1, 1.8, 3}
	if len(side.InversionTime) != 7 || side.RepetitionTime != 6 || side.EchoTime != 0.012 {
		t.Fatalf("sidecar %s", b)
	}
	for i, v := range want {
		if math.Abs(side.InversionTime[i]-v) > 1e-12 {
			t.Errorf("InversionTime[%d] = %g s, want %g", i, side.InversionTime[i], v)
		}
	}
	fromNIfTI := filepath.Join(t.TempDir(), "a")
	fromDICOM := filepath.Join(t.TempDir(), "b")
	if code, _, stderr := tauvox(t, "fit", out, "--model", "t1-ir", "--no-mask", "--no-preview", "--out", fromNIfTI); code != 0 {
		t.Fatal(stderr)
	}
	if code, _, stderr := tauvox(t, "fit", "../../testdata/dicom/protocols", "--model", "t1-ir", "--no-mask", "--no-preview", "--out", fromDICOM); code != 0 {
		t.Fatal(stderr)
	}
	a, _ := nifti.Read(filepath.Join(fromNIfTI, "T1map.nii.gz"))
	d, _ := nifti.Read(filepath.Join(fromDICOM, "T1map.nii.gz"))
	for i := range a.Data {
		if rel := math.Abs(float64(a.Data[i]-d.Data[i])) / float64(d.Data[i]); !(rel < 1e-5) {
			t.Fatalf("voxel %d: %g from the NIfTI, %g from DICOM", i, a.Data[i], d.Data[i])
		}
	}
	if code, _, stderr := tauvox(t, "convert", "../../testdata/dicom/protocols", "--series", "3,4,5,6,7,8,9", "--out", out); code != 2 || !strings.Contains(stderr, "exists; --force replaces it") {
		t.Errorf("second convert: exit %d, %q", code, stderr)
	}
	inside := "../../testdata/dicom/protocols/x.nii.gz"
	if code, _, stderr := tauvox(t, "convert", "../../testdata/dicom/protocols", "--series", "3,4", "--out", inside); code != 2 || !strings.Contains(stderr, "lies inside the input folder") {
		t.Errorf("output inside the input: exit %d, %q", code, stderr)
	}
	if _, err := os.Stat(inside); !os.IsNotExist(err) {
		t.Errorf("%s written", inside)
	}
}
