package dicom

import (
	"encoding/binary"
	"errors"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// loadFile scans one file (derived images kept: pydicom's MR_small is
// DERIVED\SECONDARY) and loads its one series.
func loadFile(t *testing.T, path string) (*volume.Image, error) {
	t.Helper()
	c, err := Scan([]string{path}, &ScanOptions{Derived: true})
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Series) != 1 {
		t.Fatalf("%s: %d series, problems %v", path, len(c.Series), c.Problems)
	}
	if err := c.Series[0].Err(); err != nil {
		return nil, err
	}
	return LoadSeries(c.Series[0])
}

// toolCase is a file whose syntax an external decoder reads: without the
// tool, the load must fail naming the syntax and the Debian package.
func needsTool(name string) string {
	switch {
	case strings.Contains(name, "jpegls"), strings.Contains(name, "jpeg_ls"):
		return "dcmdjpls"
	case strings.Contains(name, "j2k"), strings.Contains(name, "jp2k"):
		return "gdcmconv"
	}
	return ""
}

// TestCodecsIdentical: pydicom's MR_small.dcm (Debian python3-pydicom
// 2.3.1 test data, 64×64 signed 16-bit) as pydicom ships it in six
// transfer syntaxes and as dcmtk 3.6.7 and GDCM 3.0 compressed it
// (testdata/gen/dicom_codecs.sh): JPEG lossless process 14 with every
// selection value 1–7, RLE from both tools, JPEG-LS and JPEG 2000
// lossless, deflated. Every one loads to exactly the samples of the
// uncompressed original. With point transform 2 (T.81 H.1.2.3) the
// samples are the original's with the two low bits cleared. The 8-bit
// copy in SV1 and SV7 equals its uncompressed original.
func TestCodecsIdentical(t *testing.T) {
	ref, err := loadFile(t, filepath.Join(testdata, "pydicom", "MR_small.dcm"))
	if err != nil {
		t.Fatal(err)
	}
	ref8, err := loadFile(t, filepath.Join(testdata, "codecs", "mr8.dcm"))
	if err != nil {
		t.Fatal(err)
	}
	files, _ := filepath.Glob(filepath.Join(testdata, "codecs", "mr*.dcm"))
	more, _ := filepath.Glob(filepath.Join(testdata, "pydicom", "MR_small_*.dcm"))
	files = append(files, more...)
	if len(files) < 20 {
		t.Fatalf("%d files; run testdata/gen/dicom_codecs.sh", len(files))
	}
	syntaxes := map[string]bool{}
	for _, f := range files {
		name := filepath.Base(f)
		t.Run(name, func(t *testing.T) {
			want := ref
			if strings.HasPrefix(name, "mr8") {
				want = ref8
			}
			im, err := loadFile(t, f)
			if tool := needsTool(name); tool != "" {
				if _, lerr := exec.LookPath(tool); lerr != nil {
					var ue *UnsupportedError
					if err == nil || !errors.As(err, &ue) || !strings.Contains(err.Error(), "Debian package") {
						t.Errorf("without %s: %v, want an UnsupportedError naming the Debian package", tool, err)
					}
					t.Skipf("%s not installed: %v", tool, err)
				}
			}
			if err != nil {
				t.Fatal(err)
			}
			if im.Dims != want.Dims {
				t.Fatalf("dims %v, want %v", im.Dims, want.Dims)
			}
			pt := strings.Contains(name, "pt2")
			for i, v := range im.Data {
				w := want.Data[i]
				if pt {
					w = float32(int32(w) >> 2 << 2)
				}
				if v != w {
					t.Fatalf("sample %d = %g, want %g (%s)", i, v, w, im.Source.Pixels)
				}
			}
			syntaxes[im.Source.Pixels] = true
		})
	}
	t.Logf("%d ways of storing the pixels read identically", len(syntaxes))
	for s := range syntaxes {
		t.Log("  " + s)
	}
}

// TestCodecToolMissing: with the external decoders absent, a JPEG-LS file
// is refused by Scan and Load, naming the syntax and the Debian package.
func TestCodecToolMissing(t *testing.T) {
	old := lookPath
	lookPath = func(string) (string, error) { return "", exec.ErrNotFound }
	defer func() { lookPath = old }()
	_, err := loadFile(t, filepath.Join(testdata, "codecs", "mr-jpegls.dcm"))
	if err == nil || !strings.Contains(err.Error(), "JPEG-LS Lossless") || !strings.Contains(err.Error(), "1.2.840.10008.1.2.4.80") ||
		!strings.Contains(err.Error(), "Debian package dcmtk or libgdcm-tools") {
		t.Errorf("error %v", err)
	}
}

// TestCorruptCompressed: a JPEG lossless stream cut short or with a
// damaged Huffman table, and an RLE frame whose segment count does not
// match the samples, are FormatErrors naming the file and the problem on
// one line.
func TestCorruptCompressed(t *testing.T) {
	dir := t.TempDir()
	patch := func(src, name string, edit func(b []byte) []byte) string {
		b, err := os.ReadFile(filepath.Join(testdata, "codecs", src))
		if err != nil {
			t.Fatal(err)
		}
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, edit(b), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	// The JPEG stream: find SOS (FFDA) and garble the entropy-coded data
	// after it; the fragment keeps its length.
	garble := func(b []byte) []byte {
		i := strings.LastIndex(string(b), "\xff\xda")
		for k := i + 20; k < i+400; k++ {
			b[k] = 0xFF
			if k%2 == 1 {
				b[k] = 0xD4 // RST4 markers where data should be
			}
		}
		return b
	}
	// RLE: the header's segment count (first 4 bytes of the frame, after
	// the empty offset table item) set to 3 for 16-bit samples.
	segs := func(b []byte) []byte {
		i := strings.Index(string(b), "\xe0\x7f\x10\x00OB\x00\x00\xff\xff\xff\xff")
		if i < 0 {
			t.Fatal("no encapsulated pixel data found")
		}
		i += 12                                           // the Basic Offset Table item
		i += 8 + int(binary.LittleEndian.Uint32(b[i+4:])) // the first fragment item
		b[i+8] = 3
		return b
	}
	for _, tc := range []struct {
		path string
		want []string
	}{
		{patch("mr-sv1.dcm", "bad-jpeg.dcm", garble), []string{"bad-jpeg.dcm", "JPEG"}},
		{patch("mr-rle-dcmtk.dcm", "bad-rle.dcm", segs), []string{"bad-rle.dcm", "RLE header lists 3 segments; 16-bit grey-scale samples need 2"}},
	} {
		_, err := loadFile(t, tc.path)
		var fe *FormatError
		if err == nil || !errors.As(err, &fe) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: %v, want one-line FormatError", tc.path, err)
			continue
		}
		for _, w := range tc.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%q lacks %q", err, w)
			}
		}
		t.Log(err)
	}
}

// TestLossyWarned: lossy syntaxes load with a warning in the image's
// source (quantitative values from lossy data). The 8-bit copy of MR_small
// as JPEG-LS near-lossless with NEAR 2 (dcmtk dcmcjpls +en +md 2) differs
// from the original by at most 2 in every sample (ISO/IEC 14495-1 defines
// NEAR as that bound); as baseline JPEG (dcmtk dcmcjpeg +eb, read by Go's
// image/jpeg) it stays within a mean absolute error of 3 grey levels
// (common practice for the default quality; a loose check that the image
// is the right one, not of the codec's quality).
func TestLossyWarned(t *testing.T) {
	ref, err := loadFile(t, filepath.Join(testdata, "codecs", "mr8.dcm"))
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name, tool string
		maxAbs     float64
		meanAbs    float64
	}{
		{"lossy-mr8-jpegls-near2.dcm", "dcmdjpls", 2, 2},
		{"lossy-mr8-baseline.dcm", "", 255, 3},
	} {
		if tc.tool != "" {
			if _, err := exec.LookPath(tc.tool); err != nil {
				t.Logf("%s: %s not installed, skipped", tc.name, tc.tool)
				continue
			}
		}
		im, err := loadFile(t, filepath.Join(testdata, "codecs", tc.name))
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		worst, sum := 0.0, 0.0
		for i, v := range im.Data {
			d := math.Abs(float64(v - ref.Data[i]))
			worst = math.Max(worst, d)
			sum += d
		}
		mean := sum / float64(len(im.Data))
		if worst > tc.maxAbs || mean > tc.meanAbs {
			t.Errorf("%s: worst %g, mean %.3g", tc.name, worst, mean)
		}
		// MR_small is DERIVED, so the second warning says so.
		if len(im.Source.Warnings) != 2 || !strings.Contains(im.Source.Warnings[0], "lossy compressed") {
			t.Errorf("%s: warnings %q", tc.name, im.Source.Warnings)
		}
		t.Logf("%s: worst %g, mean %.3g; %s", tc.name, worst, mean, im.Source.Pixels)
	}
}

// TestCodecsMultiFrame: a 4-frame Enhanced MR file compressed frame by
// frame (dcmtk JPEG lossless SV1 and RLE, GDCM JPEG-LS; one fragment per
// frame behind a Basic Offset Table, PS3.5 A.4) loads to the samples of
// the uncompressed file.
func TestCodecsMultiFrame(t *testing.T) {
	ref, err := loadFile(t, filepath.Join(testdata, "geometry", "rwv-enhanced", "enhanced.dcm"))
	if err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{"enh-sv1.dcm", "enh-rle.dcm", "enh-jpegls-gdcm.dcm"} {
		if tool := needsTool(name); tool != "" {
			if _, err := exec.LookPath(tool); err != nil {
				t.Logf("%s: %s not installed, skipped", name, tool)
				continue
			}
		}
		im, err := loadFile(t, filepath.Join(testdata, "codecs", name))
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if im.Dims != ref.Dims {
			t.Fatalf("%s: dims %v", name, im.Dims)
		}
		for i := range im.Data {
			if im.Data[i] != ref.Data[i] {
				t.Fatalf("%s: sample %d = %g, want %g", name, i, im.Data[i], ref.Data[i])
			}
		}
	}
}
