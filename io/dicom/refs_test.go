package dicom

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// testdata is the folder of the files written by pydicom 2.3.1 with
// expected values from nibabel 5.0.0 and numpy (script
// testdata/gen/dicom_refs.py).
var testdata = filepath.Join("..", "..", "testdata", "dicom")

type refSeries struct {
	UID            string               `json:"uid"`
	Number         int                  `json:"number"`
	Description    string               `json:"description"`
	Rows, Columns  int                  `json:"-"`
	RowsJ          int                  `json:"rows"`
	ColsJ          int                  `json:"columns"`
	Slices         int                  `json:"slices"`
	Volumes        int                  `json:"volumes"`
	Files          int                  `json:"files"`
	AffineNibabel  *[4][4]float64       `json:"affine_nibabel"`
	AffineNumpy    [4][4]float64        `json:"affine_numpy"`
	Data           []float64            `json:"data"`
	Truth          map[string][]float64 `json:"truth"`
	Paths          []string             `json:"paths"`
	FileOf         map[string]string    `json:"file_of"`
	TransferSyntax string               `json:"transfer_syntax"`
	Truncated      string               `json:"truncated"`
	Odd            string               `json:"odd"`
	Slice          int                  `json:"slice"`
	TE             float64              `json:"te"`
}

type refFile struct {
	Source    string               `json:"source"`
	Series    map[string]refSeries `json:"series"`
	MixCounts struct {
		Series, Skipped, Unreadable, Ignored int
	} `json:"mix_counts"`
}

func loadRefs(t testing.TB) *refFile {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(testdata, "refs.json"))
	if err != nil {
		t.Fatal(err)
	}
	var r refFile
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	return &r
}

func scanOne(t *testing.T, dir string, opt *ScanOptions) *Catalog {
	t.Helper()
	c, err := Scan([]string{filepath.Join(testdata, dir)}, opt)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

func byUID(c *Catalog, uid string) *Series {
	for _, s := range c.Series {
		if s.UID == uid {
			return s
		}
	}
	return nil
}

func checkAffine(t *testing.T, name string, got volume.Affine, want [4][4]float64, tol float64) {
	t.Helper()
	for r := 0; r < 4; r++ {
		for c := 0; c < 4; c++ {
			if math.Abs(got[r][c]-want[r][c]) > tol {
				t.Errorf("%s: affine[%d][%d] = %.6f, want %.6f", name, r, c, got[r][c], want[r][c])
			}
		}
	}
}

// TestScanMix checks discovery and grouping of the mixed folder: the
// oblique spin-echo series and the gradient-echo series are found, the
// localizer is left out, the text, binary and empty files are counted.
func TestScanMix(t *testing.T) {
	refs := loadRefs(t)
	c := scanOne(t, "mix", nil)
	mc := refs.MixCounts
	if len(c.Series) != mc.Series || c.Skipped != mc.Skipped || c.Unreadable != mc.Unreadable || c.Ignored != mc.Ignored {
		t.Errorf("series %d skipped %d unreadable %d ignored %d; want %d %d %d %d",
			len(c.Series), c.Skipped, c.Unreadable, c.Ignored, mc.Series, mc.Skipped, mc.Unreadable, mc.Ignored)
	}
	if len(c.Problems) != 1 || !strings.Contains(c.Problems[0].String(), "empty.dcm: dicom: file is empty") {
		t.Errorf("problems = %v", c.Problems)
	}
	cases := []struct {
		key, varying, echo string
		values             []float64
	}{
		{"oblique_se", "EchoTime", "SE", []float64{10, 20, 40, 80}},
		{"gre_implicit", "EchoTime", "GR", []float64{3, 8, 13}},
	}
	for _, tc := range cases {
		ref := refs.Series[tc.key]
		s := byUID(c, ref.UID)
		if s == nil {
			t.Errorf("%s: series not found", tc.key)
			continue
		}
		if s.Varying != tc.varying || s.Echo != tc.echo || !equalFloats(s.Values, tc.values, 1e-9) {
			t.Errorf("%s: varying %q %v echo %q", tc.key, s.Varying, s.Values, s.Echo)
		}
		if s.Rows != ref.RowsJ || s.Columns != ref.ColsJ || s.Slices != ref.Slices || s.Volumes != ref.Volumes || s.Files != ref.Files {
			t.Errorf("%s: %d×%d, %d slices, %d volumes, %d files", tc.key, s.Columns, s.Rows, s.Slices, s.Volumes, s.Files)
		}
		if s.Err() != nil {
			t.Errorf("%s: %v", tc.key, s.Err())
		}
		if s.Description != ref.Description || s.Number != ref.Number || !strings.HasPrefix(s.ID, "3-") && !strings.HasPrefix(s.ID, "4-") {
			t.Errorf("%s: description %q number %d id %q", tc.key, s.Description, s.Number, s.ID)
		}
	}
	loc := scanOne(t, "mix", &ScanOptions{Localizers: true})
	if len(loc.Series) != 3 || loc.Ignored != 0 {
		t.Errorf("with localizers: %d series, %d ignored", len(loc.Series), loc.Ignored)
	}
}

func equalFloats(a, b []float64, tol float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Abs(a[i]-b[i]) > tol {
			return false
		}
	}
	return true
}

// TestLoadReference loads each reference series and compares the affine
// with nibabel's (after its (row, col) swap and LPS→RAS, check-values
// §3.4) and with the numpy evaluation of PS3.3 Eq. C.7.6.2.1-1 to 1e-4 mm,
// and every sample with the rescaled values nibabel/pydicom decode, to
// 1e-3 (float32 of values up to ~1e3).
func TestLoadReference(t *testing.T) {
	refs := loadRefs(t)
	cases := []struct {
		key, dir string
		acq      func(volume.Acquisition) float64
		want     []float64
		echo     string // "SE", "GR" for echo trains
	}{
		{"oblique_se", "mix", func(a volume.Acquisition) float64 { return a.EchoTime }, []float64{10, 20, 40, 80}, "SE"},
		{"gre_implicit", "mix", func(a volume.Acquisition) float64 { return a.EchoTime }, []float64{3, 8, 13}, "GR"},
		{"enhanced", "enhanced", func(a volume.Acquisition) float64 { return a.EchoTime }, []float64{12, 24, 36, 48}, "SE"},
		{"ir_deflate", "ir", func(a volume.Acquisition) float64 { return a.InversionTime }, []float64{50, 200, 600, 2000}, ""},
	}
	for _, tc := range cases {
		t.Run(tc.key, func(t *testing.T) {
			ref := refs.Series[tc.key]
			c := scanOne(t, tc.dir, nil)
			s := byUID(c, ref.UID)
			if s == nil {
				t.Fatalf("series not found; problems %v", c.Problems)
			}
			if s.Echo != tc.echo {
				t.Errorf("echo %q, want %q", s.Echo, tc.echo)
			}
			im, err := c.Load(s.ID)
			if err != nil {
				t.Fatal(err)
			}
			if err := im.Validate(); err != nil {
				t.Fatal(err)
			}
			if im.Dims != [4]int{ref.ColsJ, ref.RowsJ, ref.Slices, ref.Volumes} {
				t.Fatalf("dims %v", im.Dims)
			}
			if ref.AffineNibabel != nil {
				checkAffine(t, "nibabel", im.Affine, *ref.AffineNibabel, 1e-4)
			} else if tc.key != "enhanced" {
				t.Error("no nibabel affine in refs.json")
			}
			checkAffine(t, "numpy", im.Affine, ref.AffineNumpy, 1e-4)
			if got := volume.Values(nil, im.Acq, tc.acq); !equalFloats(got, tc.want, 1e-9) {
				t.Errorf("acquisition values %v, want %v", got, tc.want)
			}
			bad := 0
			for i, w := range ref.Data {
				if math.Abs(float64(im.Data[i])-w) > 1e-3*math.Max(1, math.Abs(w)) {
					if bad < 5 {
						t.Errorf("sample %d = %g, want %g", i, im.Data[i], w)
					}
					bad++
				}
			}
			if bad > 0 {
				t.Errorf("%d of %d samples differ", bad, len(ref.Data))
			}
			if im.Source.Format != "dicom" || im.Source.Scanner != "BENCH-7" || im.Source.FieldStrength != 3 || im.Source.Description != ref.Description {
				t.Errorf("source %+v", im.Source)
			}
			if !strings.HasPrefix(im.Source.AcquiredAt, "2024-05-21T09:") {
				t.Errorf("acquired at %q", im.Source.AcquiredAt)
			}
		})
	}
}

// TestTruth checks that the truth maps in refs.json line up with the
// loaded voxels: the signal equations of dicom_refs.py (S = M0·exp(−TE/T2)
// for the spin echo; S = |M0·(1 − 2·exp(−TI/T1))|, M0 = 900, for the
// inversion recovery; check-values §1.1) evaluated on the truth must match
// every loaded sample within half the rescale slope (0.25 and 0.5).
func TestTruth(t *testing.T) {
	refs := loadRefs(t)
	cases := []struct {
		key, dir string
		half     float64
		model    func(truth map[string][]float64, v int, a volume.Acquisition) float64
	}{
		{"oblique_se", "mix", 0.125, func(tr map[string][]float64, v int, a volume.Acquisition) float64 {
			return tr["M0"][v] * math.Exp(-a.EchoTime/tr["T2"][v])
		}},
		{"ir_deflate", "ir", 0.25, func(tr map[string][]float64, v int, a volume.Acquisition) float64 {
			return math.Abs(900 * (1 - 2*math.Exp(-a.InversionTime/tr["T1"][v])))
		}},
	}
	for _, tc := range cases {
		ref := refs.Series[tc.key]
		c := scanOne(t, tc.dir, nil)
		im, err := LoadSeries(byUID(c, ref.UID))
		if err != nil {
			t.Fatal(err)
		}
		nv := im.Voxels()
		for tt := 0; tt < im.Volumes(); tt++ {
			for v := 0; v < nv; v++ {
				want := tc.model(ref.Truth, v, im.Acq[tt])
				if got := float64(im.Data[tt*nv+v]); math.Abs(got-want) > tc.half+1e-3 {
					t.Fatalf("%s: volume %d voxel %d = %g, truth gives %g", tc.key, tt, v, got, want)
				}
			}
		}
	}
}
