package dicom

import (
	"encoding/json"
	"flag"
	"os"
	"path/filepath"
	"testing"
)

var update = flag.Bool("update", false, "rewrite testdata/dicom/written-by-tauvox")

// TestWrittenByTauvox keeps a small classic and enhanced series written by
// WriteSeries in testdata/dicom/written-by-tauvox, with expected.json
// (affine, grid, acquisition values, samples as written). The files are
// checked from outside with pydicom 2.3.1 and nibabel 5.0.0 by
// testdata/gen/dicom_check.py (results in dicom_check.txt). With -update
// the files are rewritten; without it, the committed files must still load
// to the expected values.
func TestWrittenByTauvox(t *testing.T) {
	dir := filepath.Join(testdata, "written-by-tauvox")
	type expect struct {
		Dims   [4]int        `json:"dims"`
		Affine [4][4]float64 `json:"affine_ras"`
		TE     []float64     `json:"echo_times"`
		Data   []float32     `json:"data"`
	}
	if *update {
		os.RemoveAll(dir)
		exp := map[string]expect{}
		for _, enh := range []bool{false, true} {
			name := map[bool]string{false: "classic", true: "enhanced"}[enh]
			im := obliqueImage(5, 4, 3, 2)
			if err := WriteSeries(filepath.Join(dir, name), im, &WriteOptions{Enhanced: enh, Rand: newSeeded(3)}); err != nil {
				t.Fatal(err)
			}
			c, err := Scan([]string{filepath.Join(dir, name)}, nil)
			if err != nil || len(c.Series) != 1 {
				t.Fatal(err)
			}
			back, err := LoadSeries(c.Series[0])
			if err != nil {
				t.Fatal(err)
			}
			exp[name] = expect{back.Dims, back.Affine, []float64{back.Acq[0].EchoTime, back.Acq[1].EchoTime}, back.Data}
		}
		b, _ := json.MarshalIndent(exp, "", " ")
		if err := os.WriteFile(filepath.Join(dir, "expected.json"), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	b, err := os.ReadFile(filepath.Join(dir, "expected.json"))
	if err != nil {
		t.Fatal(err)
	}
	var exp map[string]expect
	if err := json.Unmarshal(b, &exp); err != nil {
		t.Fatal(err)
	}
	for name, e := range exp {
		c, err := Scan([]string{filepath.Join(dir, name)}, nil)
		if err != nil || len(c.Series) != 1 {
			t.Fatalf("%s: %v", name, err)
		}
		im, err := LoadSeries(c.Series[0])
		if err != nil {
			t.Fatal(err)
		}
		checkAffine(t, name, im.Affine, e.Affine, 1e-9)
		if im.Dims != e.Dims || len(im.Data) != len(e.Data) {
			t.Fatalf("%s: dims %v", name, im.Dims)
		}
		for i := range e.Data {
			if im.Data[i] != e.Data[i] {
				t.Fatalf("%s: sample %d = %g, want %g", name, i, im.Data[i], e.Data[i])
			}
		}
	}
}
