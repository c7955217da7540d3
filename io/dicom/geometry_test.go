package dicom

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// protoRefs is testdata/dicom/protocols-refs.json, written by
// testdata/gen/dicom_protocols.py (pydicom 2.3.1; affines from nibabel
// 5.0.0 nicom.dicomwrappers).
type protoRefs struct {
	Protocols struct {
		IR struct {
			Series []string     `json:"series"`
			TI     []float64    `json:"ti"`
			Affine [][4]float64 `json:"affine"`
		} `json:"ir"`
		VFA struct {
			Series []string     `json:"series"`
			FA     []float64    `json:"fa"`
			Affine [][4]float64 `json:"affine"`
		} `json:"vfa"`
		T1   [][][]float64 `json:"t1"`
		Dims [3]int        `json:"dims"`
	} `json:"protocols"`
	Rounded struct {
		MaxDeviation float64      `json:"max_deviation_mm"`
		Affine       [][4]float64 `json:"affine"`
	} `json:"rounded"`
	DupSame struct {
		Copied string `json:"copied"`
	} `json:"dup-same"`
	RWVEnhanced map[string][]float64 `json:"rwv_enhanced"` // "echo,slice" → samples
}

func loadProtoRefs(t testing.TB) *protoRefs {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(testdata, "protocols-refs.json"))
	if err != nil {
		t.Fatal(err)
	}
	var r protoRefs
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	return &r
}

// TestRoundedPositions: positions written with one decimal (0.1 mm) lie
// up to 0.076 mm off an even step (numpy, in protocols-refs.json) — more
// than the 1 % / 0.01 mm tolerance of exact positions (0.033 mm here) —
// and are accepted, because the tolerance grows to what one decimal can
// carry (2·√3·0.05 mm). The affine is nibabel's (to 0.05 mm: nibabel puts
// SpacingBetweenSlices along the normal, tauvox the step between the
// rounded first and last positions).
func TestRoundedPositions(t *testing.T) {
	r := loadProtoRefs(t)
	if r.Rounded.MaxDeviation < 0.04 || r.Rounded.MaxDeviation > 2*math.Sqrt(3)*0.05 {
		t.Fatalf("the rounded series deviates %.3g mm: not a case between the old and the new tolerance", r.Rounded.MaxDeviation)
	}
	c := scanOne(t, "geometry/rounded", nil)
	if len(c.Series) != 1 || c.Series[0].Problem != "" {
		t.Fatalf("series %d, problems %v", len(c.Series), c.Problems)
	}
	im, err := LoadSeries(c.Series[0])
	if err != nil {
		t.Fatal(err)
	}
	if im.Dims != [4]int{4, 4, 20, 2} {
		t.Fatalf("dims %v", im.Dims)
	}
	for i := 0; i < 3; i++ {
		for j := 0; j < 4; j++ {
			if d := math.Abs(im.Affine[i][j] - r.Rounded.Affine[i][j]); d > 0.05 {
				t.Errorf("affine[%d][%d] = %.5g, nibabel %.5g", i, j, im.Affine[i][j], r.Rounded.Affine[i][j])
			}
		}
	}
}

// TestMissingSlice: the same rounded series without slice 13 is refused
// by Scan and Load, naming the slices around the gap.
func TestMissingSlice(t *testing.T) {
	c := scanOne(t, "geometry/missing", nil)
	if len(c.Series) != 1 {
		t.Fatalf("%d series", len(c.Series))
	}
	_, err := LoadSeries(c.Series[0])
	if err == nil || !errors.Is(err, ErrIncomplete) {
		t.Fatalf("load: %v, want ErrIncomplete", err)
	}
	for _, want := range []string{"a slice is missing between slice 12", "and slice 13", "usual step 3.3", "geometry/missing"} {
		if !strings.Contains(filepath.ToSlash(err.Error()), want) {
			t.Errorf("error %q lacks %q", err, want)
		}
	}
	if strings.Contains(err.Error(), "\n") {
		t.Errorf("error on more than one line: %q", err)
	}
}

// TestDuplicates: an exact copy of an image (same SOP Instance UID, same
// pixels; PS3.3 C.12.1.1.1) is left out with a note naming it; a copy
// with different pixels is refused, naming both files.
func TestDuplicates(t *testing.T) {
	r := loadProtoRefs(t)
	c := scanOne(t, "geometry/dup-same", nil)
	if len(c.Series) != 1 || c.Series[0].Problem != "" {
		t.Fatalf("series %d, problems %v", len(c.Series), c.Problems)
	}
	s := c.Series[0]
	if s.Frames != 6 || len(s.Notes) != 1 || !strings.Contains(s.Notes[0], r.DupSame.Copied) || !strings.Contains(s.Notes[0], "same SOP Instance UID and pixels") {
		t.Errorf("frames %d, notes %q", s.Frames, s.Notes)
	}
	im, err := LoadSeries(s)
	if err != nil || im.Dims != [4]int{4, 4, 3, 2} {
		t.Fatalf("load: %v", err)
	}

	c = scanOne(t, "geometry/dup-diff", nil)
	if len(c.Series) != 1 {
		t.Fatalf("%d series", len(c.Series))
	}
	_, err = LoadSeries(c.Series[0])
	if err == nil || !strings.Contains(err.Error(), "same SOP Instance UID but different pixels") || !strings.Contains(err.Error(), "copy-of-") {
		t.Errorf("load: %v, want a refusal naming the copy", err)
	}
}
