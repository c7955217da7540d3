package dicom

import (
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// item encodes one sequence item of defined length holding d's elements.
func item(d *dataset) []byte {
	body := d.bytes()
	b := []byte{0xFE, 0xFF, 0x00, 0xE0}
	b = binary.LittleEndian.AppendUint32(b, uint32(len(body)))
	return append(b, body...)
}

func fd(v float64) []byte { return binary.LittleEndian.AppendUint64(nil, math.Float64bits(v)) }

// rwvFile is a 3×2 image with stored values 1..6, RescaleSlope 2, echo
// time te, and (when slope is not NaN) a Real World Value Mapping item
// (PS3.3 C.7.6.16.2.11) with the slope, intercept and units "ms"; priv
// (when not NaN) is the private scale slope (2005,100E) as FL.
func rwvFile(te, slope, icpt, priv float64, sop string) []byte {
	return fileWith(tsExplicitLE, func(d *dataset) {
		d.drop(0x00180081)
		d.ds(0x00180081, te)
		d.drop(0x00080018)
		d.str(0x00080018, "UI", sop)
		d.ds(0x00281053, 2)
		d.drop(0x7FE00010)
		px := make([]byte, 12)
		for i := 0; i < 6; i++ {
			binary.LittleEndian.PutUint16(px[2*i:], uint16(i+1))
		}
		d.put(0x7FE00010, "OW", px)
		if !math.IsNaN(slope) {
			var units, m dataset
			units.str(0x00080100, "SH", "ms")
			units.str(0x00080102, "SH", "UCUM")
			m.put(0x004008EA, "SQ", item(&units))
			m.put(0x00409224, "FD", fd(icpt))
			m.put(0x00409225, "FD", fd(slope))
			d.put(0x00409096, "SQ", item(&m))
		}
		if !math.IsNaN(priv) {
			d.put(0x2005100E, "FL", binary.LittleEndian.AppendUint32(nil, math.Float32bits(float32(priv))))
		}
	})
}

// TestRealWorldValueMapping: with a Real World Value Mapping item the
// samples are slope·stored + intercept (PS3.3 C.7.6.16.2.11: it maps
// stored values; the rescale is not applied on top), and the image
// records which scaling was used. Two images whose private scale slope
// (2005,100E) differs, without real-world mapping, are loaded with a
// warning naming both values.
func TestRealWorldValueMapping(t *testing.T) {
	write := func(files map[string][]byte) string {
		dir := t.TempDir()
		for n, b := range files {
			if err := os.WriteFile(filepath.Join(dir, n), b, 0o644); err != nil {
				t.Fatal(err)
			}
		}
		return dir
	}
	load := func(dir string) (*Series, []float32, string, []string) {
		c, err := Scan([]string{dir}, nil)
		if err != nil || len(c.Series) != 1 {
			t.Fatalf("scan: %v, %d series, %v", err, len(c.Series), c.Problems)
		}
		im, err := LoadSeries(c.Series[0])
		if err != nil {
			t.Fatal(err)
		}
		return c.Series[0], im.Data, im.Source.Pixels, im.Source.Warnings
	}

	_, data, how, warns := load(write(map[string][]byte{"a": rwvFile(10, 0.5, 10, math.NaN(), "2.25.11")}))
	for i, v := range data {
		if want := float32(0.5*float64(i+1) + 10); v != want {
			t.Errorf("sample %d = %g, want %g", i, v, want)
		}
	}
	if !strings.Contains(how, "scaling: Real World Value Mapping slope/intercept (units ms)") || len(warns) != 0 {
		t.Errorf("pixels %q, warnings %q", how, warns)
	}

	_, data, how, _ = load(write(map[string][]byte{"a": rwvFile(10, math.NaN(), 0, math.NaN(), "2.25.11")}))
	if data[0] != 2 || !strings.Contains(how, "scaling: RescaleSlope/RescaleIntercept") {
		t.Errorf("without mapping: sample %g, pixels %q", data[0], how)
	}

	_, _, how, warns = load(write(map[string][]byte{
		"a": rwvFile(10, math.NaN(), 0, 1.5, "2.25.11"),
		"b": rwvFile(20, math.NaN(), 0, 3.25, "2.25.12"),
	}))
	if len(warns) != 1 || !strings.Contains(warns[0], "private scale slope (2005,100E) differs between images (1.5 to 3.25)") ||
		!strings.Contains(how, "private scale slope (2005,100E) 1.5 to 3.25 recorded, not applied") {
		t.Errorf("pixels %q, warnings %q", how, warns)
	}
}

// TestRealWorldValueMappingPerFrame: an Enhanced MR file whose frames
// (out of order) each carry a rescale and their own Real World Value
// Mapping (testdata/gen/dicom_protocols.py, pydicom 2.3.1) loads to
// slope·stored + intercept of each frame's mapping (PS3.3
// C.7.6.16.2.11), at the echo and slice the frame belongs to.
func TestRealWorldValueMappingPerFrame(t *testing.T) {
	r := loadProtoRefs(t)
	c := scanOne(t, "geometry/rwv-enhanced", nil)
	if len(c.Series) != 1 {
		t.Fatalf("%d series, %v", len(c.Series), c.Problems)
	}
	im, err := LoadSeries(c.Series[0])
	if err != nil {
		t.Fatal(err)
	}
	if im.Dims != [4]int{4, 4, 2, 2} || len(r.RWVEnhanced) != 4 {
		t.Fatalf("dims %v, %d reference frames", im.Dims, len(r.RWVEnhanced))
	}
	for key, want := range r.RWVEnhanced {
		var te, k int
		if _, err := fmt.Sscanf(key, "%d,%d", &te, &k); err != nil {
			t.Fatal(err)
		}
		got := im.Data[(te*2+k)*16 : (te*2+k+1)*16]
		for i := range want {
			if float64(got[i]) != want[i] {
				t.Fatalf("echo %d slice %d sample %d = %g, want %g", te, k, i, got[i], want[i])
			}
		}
	}
	if !strings.Contains(im.Source.Pixels, "Real World Value Mapping slope/intercept (units 1)") {
		t.Errorf("pixels %q", im.Source.Pixels)
	}
}
