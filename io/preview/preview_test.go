package preview

import (
	"bytes"
	"flag"
	"image"
	"image/color"
	"image/png"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/volume"
	"gonum.org/v1/gonum/floats/scalar"
)

var update = flag.Bool("update", false, "rewrite the golden PNG files in testdata")

// TestTablesMatchGenerator checks the generated tables against the values
// printed by the generator: matplotlib 3.6.3 (Debian python3-matplotlib),
// script testdata/gen/colormaps.py.
func TestTablesMatchGenerator(t *testing.T) {
	if MatplotlibVersion != "3.6.3" {
		t.Errorf("MatplotlibVersion = %q, want 3.6.3", MatplotlibVersion)
	}
	for _, tc := range []struct {
		cm               ColorMap
		first, mid, last color.RGBA
	}{
		{Plasma, color.RGBA{13, 8, 135, 255}, color.RGBA{204, 71, 120, 255}, color.RGBA{240, 249, 33, 255}},
		{Viridis, color.RGBA{68, 1, 84, 255}, color.RGBA{33, 145, 140, 255}, color.RGBA{253, 231, 37, 255}},
		{Cividis, color.RGBA{0, 34, 78, 255}, color.RGBA{125, 124, 120, 255}, color.RGBA{254, 232, 56, 255}},
		{Gray, color.RGBA{38, 38, 38, 255}, color.RGBA{147, 147, 147, 255}, color.RGBA{255, 255, 255, 255}},
	} {
		t.Run(tc.cm.Name, func(t *testing.T) {
			if len(tc.cm.Colors) != 256 {
				t.Fatalf("%d entries, want 256", len(tc.cm.Colors))
			}
			if got := tc.cm.Colors[0]; got != tc.first {
				t.Errorf("first = %v, want %v", got, tc.first)
			}
			if got := tc.cm.Colors[128]; got != tc.mid {
				t.Errorf("[128] = %v, want %v", got, tc.mid)
			}
			if got := tc.cm.Colors[255]; got != tc.last {
				t.Errorf("last = %v, want %v", got, tc.last)
			}
		})
	}
}

// TestPerceptualOrder checks that each table runs from dark to light: the
// sRGB luma (ITU-R BT.601 weights, common practice) of the last entry
// exceeds that of the first by a wide margin.
func TestPerceptualOrder(t *testing.T) {
	luma := func(c color.RGBA) float64 { return 0.299*float64(c.R) + 0.587*float64(c.G) + 0.114*float64(c.B) }
	for _, cm := range []ColorMap{Plasma, Viridis, Cividis, Gray} {
		if d := luma(cm.Brightest()) - luma(cm.Darkest()); d < 150 {
			t.Errorf("%s: luma rises by %.0f, want ≥ 150", cm.Name, d)
		}
	}
}

func TestInvalidAndClipping(t *testing.T) {
	invalids := []color.RGBA{Black, {255, 0, 255, 255}}
	for _, cm := range []ColorMap{Plasma, Viridis, Cividis, Gray, Plasma.Reversed(), Viridis.Reversed()} {
		for _, inv := range invalids {
			for _, v := range []float64{math.NaN(), math.Inf(1), math.Inf(-1)} {
				if got := ColorOf(cm, v, 10, 20, inv); got != inv {
					t.Errorf("%s: colour of %v = %v, want invalid %v", cm.Name, v, got, inv)
				}
			}
			for _, v := range []float64{-1e9, 0, 9.99, 10} {
				got := ColorOf(cm, v, 10, 20, inv)
				if got != cm.Darkest() {
					t.Errorf("%s: colour of %v below the window = %v, want darkest %v", cm.Name, v, got, cm.Darkest())
				}
				if got == inv {
					t.Errorf("%s: a valid value below the window has the invalid colour", cm.Name)
				}
			}
			if got := ColorOf(cm, 25, 10, 20, inv); got != cm.Brightest() {
				t.Errorf("%s: above the window = %v, want brightest", cm.Name, got)
			}
		}
		// The darkest valid colour stays visibly apart from black: at
		// least one channel differs by 30 or more.
		d := cm.Darkest()
		if max(d.R, d.G, d.B) < 30 {
			t.Errorf("%s: darkest valid colour %v is too close to the invalid black", cm.Name, d)
		}
	}
	// Bins: the window is split into 256 equal bins.
	if got := ColorOf(Gray, 15, 10, 20, Black); got != Gray.Colors[128] {
		t.Errorf("middle of the window = %v, want entry 128", got)
	}
	if got := ColorOf(Gray, 19.999, 10, 20, Black); got != Gray.Colors[255] {
		t.Errorf("top of the window = %v, want entry 255", got)
	}
}

func TestReversed(t *testing.T) {
	for _, cm := range []ColorMap{Plasma, Viridis, Cividis, Gray} {
		r := cm.Reversed()
		n := len(cm.Colors)
		for i := range cm.Colors {
			if r.Colors[i] != cm.Colors[n-1-i] {
				t.Fatalf("%s: reversed[%d] = %v, want %v", cm.Name, i, r.Colors[i], cm.Colors[n-1-i])
			}
		}
		if r.Darkest() != cm.Brightest() {
			t.Errorf("%s: reversed darkest is not the brightest", cm.Name)
		}
		rr := r.Reversed()
		if rr.Name != cm.Name || rr.Colors[0] != cm.Colors[0] {
			t.Errorf("%s: reversing twice gives %q", cm.Name, rr.Name)
		}
	}
	// A rate map shows high rates (short times) where the time map shows
	// low values: the colour of R = 1000/T in the reversed table equals
	// the colour of T in the forward table at the mirrored position.
	r := Viridis.Reversed()
	if ColorOf(r, 0, 0, 100, Black) != ColorOf(Viridis, 100, 0, 100, Black) {
		t.Error("reversed table does not mirror the forward one")
	}
}

func TestForQuantity(t *testing.T) {
	for _, tc := range []struct {
		name string
		want string
		rev  bool
		unit string
	}{
		{"T1", "plasma", false, "ms"},
		{"t1map", "plasma", false, "ms"},
		{"R1", "plasma", true, "1/s"},
		{"R1map", "plasma", true, "1/s"},
		{"T2", "viridis", false, "ms"},
		{"T2*", "viridis", false, "ms"},
		{"T2starmap", "viridis", false, "ms"},
		{"R2", "viridis", true, "1/s"},
		{"R2star", "viridis", true, "1/s"},
		{"R2*", "viridis", true, "1/s"},
		{"MWF", "cividis", false, "fraction"},
		{"MWFmap", "cividis", false, "fraction"},
		{"water_fraction", "cividis", false, "fraction"},
		{"M0", "gray", false, "a.u."},
		{"B1map", "gray", false, "a.u."},
		{"", "gray", false, "a.u."},
	} {
		cm, rev := ForQuantity(tc.name)
		if cm.Name != tc.want || rev != tc.rev {
			t.Errorf("ForQuantity(%q) = %s, %v; want %s, %v", tc.name, cm.Name, rev, tc.want, tc.rev)
		}
		if u := DefaultUnit(tc.name); u != tc.unit {
			t.Errorf("DefaultUnit(%q) = %q, want %q", tc.name, u, tc.unit)
		}
	}
	// T1 and T2 never share a table.
	a, _ := ForQuantity("T1")
	b, _ := ForQuantity("T2")
	if a.Colors[0] == b.Colors[0] {
		t.Error("T1 and T2 use the same table")
	}
}

func TestSliceOrientation(t *testing.T) {
	// 2×2 slice, values = index i + 2j. The top-left pixel shows i=0, j=1.
	vals := []float32{0, 1, 2, 3}
	img := Slice(nil, vals, 2, 2, Gray, 0, 4, Black)
	for _, tc := range []struct {
		x, y int
		v    float64
	}{{0, 0, 2}, {1, 0, 3}, {0, 1, 0}, {1, 1, 1}} {
		if got, want := img.RGBAAt(tc.x, tc.y), ColorOf(Gray, tc.v, 0, 4, Black); got != want {
			t.Errorf("pixel (%d,%d) = %v, want colour of %v (%v)", tc.x, tc.y, got, tc.v, want)
		}
	}
	// Scaling into a larger destination by nearest neighbour: a 6×4 image
	// of the same slice keeps the quadrants.
	big := Slice(image.NewRGBA(image.Rect(0, 0, 6, 4)), vals, 2, 2, Gray, 0, 4, Black)
	if big.RGBAAt(5, 0) != img.RGBAAt(1, 0) || big.RGBAAt(0, 3) != img.RGBAAt(0, 1) {
		t.Error("scaled slice does not keep the quadrants")
	}
}

func TestSliceNoAlloc(t *testing.T) {
	vals := make([]float32, 64*64)
	for i := range vals {
		vals[i] = float32(i)
	}
	vals[7] = float32(math.NaN())
	dst := image.NewRGBA(image.Rect(0, 0, 128, 128))
	if n := testing.AllocsPerRun(10, func() { Slice(dst, vals, 64, 64, Viridis, 0, 4096, Black) }); n != 0 {
		t.Errorf("Slice allocates %v times per call, want 0", n)
	}
}

func TestAutoRange(t *testing.T) {
	nan := float32(math.NaN())
	inf := float32(math.Inf(1))
	seq := make([]float32, 0, 103)
	for i := 1; i <= 100; i++ {
		seq = append(seq, float32(i))
	}
	seq = append(seq, nan, inf, -inf)
	for _, tc := range []struct {
		name   string
		vals   []float32
		lo, hi float64
	}{
		// numpy 1.24.2: np.percentile(np.arange(1, 101), [1, 99]) = [1.99, 99.01].
		{"1..100 with NaN and Inf", seq, 1.99, 99.01},
		// numpy 1.24.2: np.percentile([5, 1, 3, 2, 4], [1, 99]) = [1.04, 4.96].
		{"unsorted", []float32{5, 1, 3, 2, 4}, 1.04, 4.96},
		{"nothing finite", []float32{nan, inf}, 0, 1},
		{"empty", nil, 0, 1},
		{"constant", []float32{200, 200}, 190, 210},
		{"zeros", []float32{0, 0}, 0, 1},
	} {
		lo, hi := AutoRange(tc.vals)
		if !scalar.EqualWithinAbsOrRel(lo, tc.lo, 1e-9, 1e-9) || !scalar.EqualWithinAbsOrRel(hi, tc.hi, 1e-9, 1e-9) {
			t.Errorf("%s: AutoRange = %v, %v; want %v, %v", tc.name, lo, hi, tc.lo, tc.hi)
		}
	}
}

// TestAutoRangeExact checks the binned selection of AutoRange against a
// full sort of the finite values (Hyndman & Fan definition 7 written out
// on the sorted copy), exactly, on data that put the percentiles inside
// crowded bins, across empty ones and at ties, zeros of both signs,
// negative values and non-finite values.
func TestAutoRangeExact(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	ref := func(vals []float32) (float64, float64) {
		var s []float64
		for _, v := range vals {
			if f := float64(v); !math.IsNaN(f) && !math.IsInf(f, 0) {
				s = append(s, f)
			}
		}
		if len(s) == 0 {
			return math.NaN(), math.NaN()
		}
		slices.Sort(s)
		q := func(p float64) float64 {
			h := p * float64(len(s)-1)
			k := int(math.Floor(h))
			if k >= len(s)-1 {
				return s[len(s)-1]
			}
			return s[k] + (h-float64(k))*(s[k+1]-s[k])
		}
		return q(0.01), q(0.99)
	}
	gens := map[string]func(i int) float32{
		"normal":       func(int) float32 { return float32(100 + 30*r.NormFloat64()) },
		"narrow":       func(int) float32 { return float32(1000 + 1e-3*r.NormFloat64()) },
		"ties":         func(int) float32 { return float32(r.IntN(4)) },
		"signed zeros": func(i int) float32 { return float32(math.Copysign(0, float64(i%2*2-1))) * float32(r.IntN(2)) },
		"negative":     func(int) float32 { return float32(-math.Exp(5 * r.NormFloat64())) },
		"wide":         func(int) float32 { return float32(math.Exp(40*r.Float64()-20) * float64(r.IntN(3)-1)) },
		"nan and inf": func(i int) float32 {
			switch i % 5 {
			case 0:
				return float32(math.NaN())
			case 1:
				return float32(math.Inf(1 - 2*(i%2)))
			}
			return float32(r.ExpFloat64())
		},
		"two clusters": func(i int) float32 { return float32(i%2)*1e6 + float32(r.Float64()) },
	}
	for name, g := range gens {
		for _, n := range []int{1, 2, 3, 7, 100, 101, 1000, 100_003} {
			vals := make([]float32, n)
			for i := range vals {
				vals[i] = g(i)
			}
			wlo, whi := ref(vals)
			if math.IsNaN(wlo) { // nothing finite
				continue
			}
			lo, hi := AutoRange(slices.Clone(vals))
			if whi > wlo && (lo != wlo || hi != whi) {
				t.Errorf("%s, n %d: AutoRange = %v, %v; the sorted values give %v, %v", name, n, lo, hi, wlo, whi)
			}
		}
	}
}

func TestParseWindow(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want Window
		err  string
	}{
		{"0,2000", Window{0, 2000}, ""},
		{" 10 : 300 ", Window{10, 300}, ""},
		{"-1.5,2e3", Window{-1.5, 2000}, ""},
		{"100", Window{}, `range "100": want LO,HI`},
		{"a,b", Window{}, `range "a,b": want two finite numbers LO,HI`},
		{"5,5", Window{}, `range "5,5": LO must be below HI`},
		{"9,1", Window{}, `range "9,1": LO must be below HI`},
		{"NaN,1", Window{}, `range "NaN,1": want two finite numbers LO,HI`},
	} {
		w, err := ParseWindow(tc.in)
		if tc.err != "" {
			if err == nil || err.Error() != tc.err {
				t.Errorf("ParseWindow(%q) error = %v, want %q", tc.in, err, tc.err)
			}
			continue
		}
		if err != nil || w != tc.want {
			t.Errorf("ParseWindow(%q) = %v, %v; want %v", tc.in, w, err, tc.want)
		}
	}
	if lo, hi := (Window{}).Resolve([]float32{1, 2, 3}); lo != 1.02 || hi != 2.98 {
		// Hyndman–Fan 7 on {1,2,3}: 1 + 0.02·1, 2 + 0.98·1.
		t.Errorf("zero window resolves to %v, %v", lo, hi)
	}
}

// testMap is a small invented 3-D map: a ramp from 0 to 2000 ms with a
// failed voxel (NaN) and a value below the window.
func testMap() *volume.Image {
	im := volume.New(12, 8, 3, 1)
	im.Affine[0][0], im.Affine[1][1], im.Affine[2][2] = 1, 1.5, 3
	for k := 0; k < 3; k++ {
		for j := 0; j < 8; j++ {
			for i := 0; i < 12; i++ {
				im.Data[im.Index(i, j, k, 0)] = float32(100 + 150*i + 20*j + 300*k)
			}
		}
	}
	im.Data[im.Index(2, 6, 0, 0)] = float32(math.NaN())
	im.Data[im.Index(3, 1, 1, 0)] = -50
	return im
}

func TestMontage(t *testing.T) {
	im := testMap()
	img, err := Montage(im, &Options{Quantity: "T1", Window: Window{0, 2000}, Title: "T1map"})
	if err != nil {
		t.Fatal(err)
	}
	// Slice tiles: 12×8 voxels of 1×1.5 mm at the automatic zoom
	// (⌈160/12⌉ = 14, capped at 8) → 96×96 pixels.
	tw, th := tileSize(12, 8, im.Affine.VoxelSize(), 0)
	if tw != 96 || th != 96 {
		t.Errorf("tile %d×%d, want 96×96", tw, th)
	}
	// The NaN voxel (i=2, j=6, k=0) is drawn black; the value below the
	// window (i=3, j=1, k=1) in the darkest valid colour.
	x0, y0 := margin, margin+lineH+8
	px := func(k, i, j int) color.RGBA {
		col := k % 2 // ⌈√3⌉ = 2 columns
		row := k / 2
		x := x0 + col*(tw+tileGap) + i*tw/12 + tw/24
		y := y0 + row*(th+tileGap) + (7-j)*th/8 + th/16
		return img.RGBAAt(x, y)
	}
	if got := px(0, 2, 6); got != Black {
		t.Errorf("NaN voxel drawn %v, want black", got)
	}
	if got := px(1, 3, 1); got != Plasma.Darkest() {
		t.Errorf("below-window voxel drawn %v, want darkest %v", got, Plasma.Darkest())
	}
	checkGolden(t, "montage_t1.png", img)

	// A rate map uses the reversed table.
	r, err := Montage(im, &Options{Quantity: "R2", Window: Window{0, 2000}})
	if err != nil {
		t.Fatal(err)
	}
	// Voxel (0,0,0) = 100 lies in bin 100/2000·256 = 12.8 → 12, drawn
	// with entry 255−12 of the forward table.
	if got := r.RGBAAt(margin+tw/24, margin+th-th/16); got != Viridis.Colors[255-12] {
		t.Errorf("rate voxel drawn %v, want viridis entry 243 %v", got, Viridis.Colors[243])
	}

	if _, err := Montage(volume.New(2, 2, 2, 3), nil); err == nil || !strings.Contains(err.Error(), "3 volumes") {
		t.Errorf("4-D montage: error %v", err)
	}
	if _, err := Montage(&volume.Image{}, nil); err == nil {
		t.Error("empty image: no error")
	}
}

func TestSliceGolden(t *testing.T) {
	vals := []float32{
		0, 10, 20, 30, 40,
		50, float32(math.NaN()), 70, 80, 90,
		100, 110, -5, 130, 200,
	}
	img := Slice(image.NewRGBA(image.Rect(0, 0, 10, 6)), vals, 5, 3, Viridis.Reversed(), 0, 140, Black)
	checkGolden(t, "slice_r2.png", img)
}

// checkGolden compares img with testdata/name, rewriting it with -update.
func checkGolden(t *testing.T, name string, img *image.RGBA) {
	t.Helper()
	path := filepath.Join("testdata", name)
	if *update {
		if err := os.MkdirAll("testdata", 0o755); err != nil {
			t.Fatal(err)
		}
		if err := WritePNG(path, img); err != nil {
			t.Fatal(err)
		}
		return
	}
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test -update to create it)", err)
	}
	want, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	if !want.Bounds().Eq(img.Bounds()) {
		t.Fatalf("%s: size %v, golden %v", name, img.Bounds(), want.Bounds())
	}
	for y := img.Bounds().Min.Y; y < img.Bounds().Max.Y; y++ {
		for x := img.Bounds().Min.X; x < img.Bounds().Max.X; x++ {
			if color.RGBAModel.Convert(want.At(x, y)) != img.RGBAAt(x, y) {
				t.Fatalf("%s: pixel (%d,%d) = %v, golden %v", name, x, y, img.RGBAAt(x, y), want.At(x, y))
			}
		}
	}
}

func TestWritePNG(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "a.png")
	img := Slice(nil, []float32{1, 2, 3, 4}, 2, 2, Gray, 0, 5, Black)
	if err := os.WriteFile(path, []byte("old"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := WritePNG(path, img); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if _, err := png.Decode(f); err != nil {
		t.Fatalf("written file does not decode: %v", err)
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Errorf("folder holds %d entries after the write, want 1 (no temporary left)", len(ents))
	}
	bad := filepath.Join(dir, "missing", "b.png")
	if err := WritePNG(bad, img); err == nil || !strings.Contains(err.Error(), bad) {
		t.Errorf("write into a missing folder: error %v, want one naming %s", err, bad)
	}
}

// TestDrawableLabels (issue 17): every label of the quantities, units and
// windows tauvox draws has a glyph in the 7×13 face (printable ASCII and
// Latin-1: R², °, µ render); typographic signs outside it are folded.
func TestDrawableLabels(t *testing.T) {
	for _, s := range []string{"R²", "ms", "1/s", "a.u.", "percent", "°", "T2*", "µs", "fraction"} {
		if Drawable(s) != s {
			t.Errorf("%q folded to %q", s, Drawable(s))
		}
	}
	for in, want := range map[string]string{"−12": "-12", "0–300": "0-300", "T1ρ": "T1rho", "≤ 5 σ": "<= 5 sigma", "→": "?"} {
		if got := Drawable(in); got != want {
			t.Errorf("%q: %q, want %q", in, got, want)
		}
	}
	for _, r := range Drawable("−α≤…→") {
		if !hasGlyph(r) {
			t.Errorf("rune %q has no glyph", r)
		}
	}
}
