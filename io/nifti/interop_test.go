package nifti

import (
	"bytes"
	"compress/gzip"
	"encoding/binary"
	"encoding/json"
	"flag"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

var update = flag.Bool("update", false, "rewrite testdata/nifti/written-by-tauvox")

const testdata = "../../testdata/nifti"

type ref struct {
	File      string
	Note      string
	Version   int
	BigEndian bool `json:"big_endian"`
	Datatype  int
	Dims      [4]int
	Pixdim    [8]float64
	VoxOffset int64    `json:"vox_offset"`
	XYZTUnits uint8    `json:"xyzt_units"`
	SclSlope  *float64 `json:"scl_slope"`
	SclInter  *float64 `json:"scl_inter"`
	Descrip   string
	QformCode int           `json:"qform_code"`
	SformCode int           `json:"sform_code"`
	Qform     volume.Affine `json:"qform"`
	Sform     volume.Affine `json:"sform"`
	AffineMM  volume.Affine `json:"affine_mm"`
	Data      []float64
}

// TestNibabelFiles reads the files nibabel wrote and compares everything
// with what nibabel reads from them (nibabel 5.0.0, script
// testdata/gen/nifti_refs.py; expected values in testdata/nifti/refs.json).
func TestNibabelFiles(t *testing.T) {
	raw, err := os.ReadFile(filepath.Join(testdata, "refs.json"))
	if err != nil {
		t.Fatal(err)
	}
	var refs struct {
		Source string
		Files  []ref
	}
	if err := json.Unmarshal(raw, &refs); err != nil {
		t.Fatal(err)
	}
	if len(refs.Files) < 15 {
		t.Fatalf("refs.json lists %d files", len(refs.Files))
	}
	for _, r := range refs.Files {
		t.Run(r.File, func(t *testing.T) {
			path := filepath.Join(testdata, r.File)
			im, err := Read(path)
			if err != nil {
				t.Fatal(err)
			}
			h, err := ReadHeader(path)
			if err != nil {
				t.Fatal(err)
			}
			if im.Dims != r.Dims {
				t.Errorf("dims %v, want %v", im.Dims, r.Dims)
			}
			if len(im.Data) != len(r.Data) {
				t.Fatalf("%d samples, want %d", len(im.Data), len(r.Data))
			}
			for i, w := range r.Data {
				// float32 holds the nibabel float64 value to half an ulp.
				if g := float64(im.Data[i]); math.Abs(g-w) > 6e-8*math.Abs(w) {
					t.Fatalf("sample %d = %.9g, nibabel %.9g", i, g, w)
				}
			}
			if !affineClose(im.Affine, r.AffineMM, 1e-9) {
				t.Errorf("affine\n%v\nwant\n%v", im.Affine, r.AffineMM)
			}
			if !affineClose(h.Qform(), r.Qform, 1e-9) && r.QformCode > 0 {
				t.Errorf("qform\n%v\nnibabel get_qform\n%v", h.Qform(), r.Qform)
			}
			if !affineClose(h.Sform(), r.Sform, 1e-12) && r.SformCode > 0 {
				t.Errorf("sform\n%v\nnibabel get_sform\n%v", h.Sform(), r.Sform)
			}
			wantOrder := binary.ByteOrder(binary.LittleEndian)
			if r.BigEndian {
				wantOrder = binary.BigEndian
			}
			if h.Version != r.Version || h.ByteOrder != wantOrder || int(h.Datatype) != r.Datatype ||
				h.QformCode != r.QformCode || h.SformCode != r.SformCode || h.VoxOffset != r.VoxOffset ||
				h.XYZTUnits != r.XYZTUnits || h.Descrip != r.Descrip || h.Pixdim != r.Pixdim {
				t.Errorf("header %+v\nwant %+v", h, r)
			}
			if r.SclSlope != nil && (h.SclSlope != *r.SclSlope || h.SclInter != *r.SclInter) {
				t.Errorf("scl_slope/inter %g %g, want %g %g", h.SclSlope, h.SclInter, *r.SclSlope, *r.SclInter)
			}
			if strings.HasSuffix(r.File, ".hdr") {
				// The pair can be named by either half.
				im2, err := Read(strings.TrimSuffix(path, ".hdr") + ".img")
				if err != nil {
					t.Fatal(err)
				}
				if !equalData(im2.Data, im.Data) {
					t.Error("reading the .img half gives other samples")
				}
			}
		})
	}
}

func equalData(a, b []float32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] && !(a[i] != a[i] && b[i] != b[i]) {
			return false
		}
	}
	return true
}

// TestGzipByMagic: compression is recognised from the content, so a plain
// file named .nii.gz and a compressed file named .nii both read.
func TestGzipByMagic(t *testing.T) {
	dir := t.TempDir()
	plain, err := os.ReadFile(filepath.Join(testdata, "u8.nii"))
	if err != nil {
		t.Fatal(err)
	}
	want, err := Read(filepath.Join(testdata, "u8.nii"))
	if err != nil {
		t.Fatal(err)
	}
	var z bytes.Buffer
	zw := gzip.NewWriter(&z)
	zw.Write(plain)
	zw.Close()
	for name, content := range map[string][]byte{"plain.nii.gz": plain, "packed.nii": z.Bytes()} {
		p := filepath.Join(dir, name)
		os.WriteFile(p, content, 0o644)
		got, err := Read(p)
		if err != nil {
			t.Fatal(err)
		}
		if !equalData(got.Data, want.Data) || got.Affine != want.Affine {
			t.Errorf("%s differs from u8.nii", name)
		}
	}
}

// tauvoxWritten lists the files committed in testdata/nifti/written-by-tauvox
// for the nibabel check (testdata/gen/nifti_check.py).
func tauvoxWritten() map[string]struct {
	im  *volume.Image
	opt *WriteOptions
} {
	oblique := testImage(3)
	for i := range oblique.Data {
		oblique.Data[i] = float32(math.Sin(float64(i))*1000) / 7
	}
	oblique.Data[5] = float32(math.NaN())
	labels := testImage(1)
	for i := range labels.Data {
		labels.Data[i] = float32(i % 7)
	}
	shear := volume.New(3, 2, 2, 1)
	shear.Affine = volume.Affine{{1.2, 0.3, 0, -40}, {0, 0.9, 0.2, 12.5}, {0.1, 0, 2.5, 7}, {0, 0, 0, 1}}
	for i := range shear.Data {
		shear.Data[i] = float32(i) - 5
	}
	// A map as a fit writes it (RunsCompression): a disc of values in a
	// NaN background, whose runs exceed one match (258 bytes).
	disc := volume.New(40, 40, 3, 1)
	for i := range disc.Data {
		x, y := float64(i%40-20), float64(i/40%40-20)
		disc.Data[i] = float32(math.NaN())
		if x*x+y*y < 150 {
			disc.Data[i] = float32(40+math.Cos(float64(i))*30) / 3
		}
	}
	return map[string]struct {
		im  *volume.Image
		opt *WriteOptions
	}{
		"map_runs_f32.nii.gz": {disc, &WriteOptions{Description: "tauvox map, runs compression", Compression: RunsCompression}},
		"oblique_f32.nii.gz":  {oblique, &WriteOptions{Description: "tauvox oblique float32", TimeStep: 10}},
		"labels_u8.nii":       {labels, &WriteOptions{Datatype: Uint8, Description: "tauvox labels"}},
		"shear_i16_n2.nii":    {shear, &WriteOptions{Datatype: Int16, Version: 2, Description: "tauvox shear nifti2"}},
	}
}

type written struct {
	Datatype  int           `json:"datatype"`
	Version   int           `json:"version"`
	Dims      [4]int        `json:"dims"`
	Affine    volume.Affine `json:"affine"`
	Qform     volume.Affine `json:"qform"`
	Qfac      float64       `json:"qfac"`
	Data      []*float64    `json:"data"` // null for NaN
	Descrip   string        `json:"descrip"`
	TimeStep  float64       `json:"pixdim4"`
	VoxOffset int64         `json:"vox_offset"`
}

// TestWrittenByTauvox keeps testdata/nifti/written-by-tauvox in step with
// the writer: the committed files must hold the bytes Write makes now
// (compared after decompression), so that the nibabel check recorded in
// nifti_check.txt (nibabel 5.0.0, script testdata/gen/nifti_check.py)
// still applies. Regenerate with go test -run WrittenByTauvox -update, then
// rerun the script.
func TestWrittenByTauvox(t *testing.T) {
	dir := filepath.Join(testdata, "written-by-tauvox")
	out := t.TempDir()
	if *update {
		out = dir
	}
	expect := map[string]written{}
	for name, c := range tauvoxWritten() {
		p := filepath.Join(out, name)
		if err := Write(p, c.im, c.opt); err != nil {
			t.Fatal(err)
		}
		h, err := ReadHeader(p)
		if err != nil {
			t.Fatal(err)
		}
		w := written{Datatype: int(h.Datatype), Version: h.Version, Dims: c.im.Dims, Affine: c.im.Affine,
			Qform: h.Qform(), Qfac: h.Qfac(), Descrip: h.Descrip, TimeStep: h.Pixdim[4], VoxOffset: h.VoxOffset}
		for _, v := range c.im.Data {
			if v != v {
				w.Data = append(w.Data, nil)
			} else {
				f := float64(v)
				w.Data = append(w.Data, &f)
			}
		}
		expect[name] = w
		if *update {
			continue
		}
		if got, want := content(t, p), content(t, filepath.Join(dir, name)); !bytes.Equal(got, want) {
			t.Errorf("%s: Write now makes other bytes than the committed file; run with -update and rerun testdata/gen/nifti_check.py", name)
		}
	}
	js, err := json.MarshalIndent(expect, "", " ")
	if err != nil {
		t.Fatal(err)
	}
	js = append(js, '\n')
	exp := filepath.Join(dir, "expected.json")
	if *update {
		if err := os.WriteFile(exp, js, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	if old, err := os.ReadFile(exp); err != nil || !bytes.Equal(old, js) {
		t.Errorf("%s is out of date (%v); run with -update", exp, err)
	}
	// The nibabel check must have passed on these files.
	log, err := os.ReadFile(filepath.Join(dir, "nifti_check.txt"))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(log), "ALL OK") || strings.Contains(string(log), "FAIL") {
		t.Errorf("nifti_check.txt does not record a passing nibabel check:\n%s", log)
	}
}

// content returns the file's bytes, decompressed when gzip.
func content(t *testing.T, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if len(b) > 2 && b[0] == 0x1f && b[1] == 0x8b {
		z, err := gzip.NewReader(bytes.NewReader(b))
		if err != nil {
			t.Fatal(err)
		}
		if b, err = io.ReadAll(z); err != nil {
			t.Fatal(err)
		}
	}
	return b
}
