package main

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/io/nifti"
)

// TestFitCompressedIdentical: the 7-series inversion recovery protocol of
// testdata/dicom/protocols, compressed by dcmtk 3.6.7 and GDCM 3.0
// (testdata/gen/dicom_codecs.sh) as JPEG lossless SV1 and process 14 SV4,
// RLE, JPEG-LS lossless and JPEG 2000 lossless, fits to the very same T1
// map, byte for byte, as the uncompressed export; provenance.json says how
// the pixels were decoded. JPEG-LS and JPEG 2000 need Debian's dcmtk or
// GDCM (.ci/run installs them); without them the test says so and skips
// those two.
func TestFitCompressedIdentical(t *testing.T) {
	base := filepath.Join(t.TempDir(), "plain")
	if code, _, stderr := tauvox(t, "fit", "../../testdata/dicom/protocols", "--model", "t1-ir", "--no-mask", "--no-preview", "--workers", "2", "--out", base); code != 0 {
		t.Fatal(stderr)
	}
	want := readMapSamples(t, filepath.Join(base, "T1map.nii.gz"))
	for _, tc := range []struct{ dir, tool, how string }{
		{"ir-sv1", "", "JPEG Lossless process 14 selection value 1, decoded by tauvox"},
		{"ir-p14-sv4", "", "JPEG Lossless process 14, decoded by tauvox"},
		{"ir-rle", "", "RLE Lossless, decoded by tauvox"},
		{"ir-jpegls", "dcmdjpls", "JPEG-LS Lossless (1.2.840.10008.1.2.4.80), decoded by dcmdjpls"},
		{"ir-j2k", "gdcmconv", "JPEG 2000 Lossless (1.2.840.10008.1.2.4.90), decoded by gdcmconv"},
	} {
		t.Run(tc.dir, func(t *testing.T) {
			if tc.tool != "" {
				if _, err := exec.LookPath(tc.tool); err != nil {
					t.Skipf("%s is not installed (Debian dcmtk / libgdcm-tools): %v", tc.tool, err)
				}
			}
			out := filepath.Join(t.TempDir(), "fit")
			if code, _, stderr := tauvox(t, "fit", filepath.Join("../../testdata/dicom/codecs", tc.dir), "--model", "t1-ir", "--no-mask", "--no-preview", "--workers", "2", "--out", out); code != 0 {
				t.Fatal(stderr)
			}
			if got := readMapSamples(t, filepath.Join(out, "T1map.nii.gz")); !bytes.Equal(got, want) {
				t.Errorf("T1 map differs from the uncompressed fit")
			}
			b, err := os.ReadFile(filepath.Join(out, "provenance.json"))
			if err != nil {
				t.Fatal(err)
			}
			var prov struct {
				Pixels   string   `json:"pixel_data"`
				Warnings []string `json:"warnings"`
			}
			if err := json.Unmarshal(b, &prov); err != nil {
				t.Fatal(err)
			}
			if !strings.Contains(prov.Pixels, tc.how) || len(prov.Warnings) != 0 {
				t.Errorf("provenance pixel_data %q warnings %q, want %q", prov.Pixels, prov.Warnings, tc.how)
			}
		})
	}
}

// readMapSamples returns the bit patterns of a map's samples.
func readMapSamples(t *testing.T, path string) []byte {
	t.Helper()
	im, err := nifti.Read(path)
	if err != nil {
		t.Fatal(err)
	}
	b := make([]byte, 4*len(im.Data))
	for i, v := range im.Data {
		binary.LittleEndian.PutUint32(b[4*i:], math.Float32bits(v))
	}
	return b
}

// TestFitCorruptCompressed: a protocol in which one file's JPEG stream is
// garbled, or one RLE frame's header lists the wrong number of segments,
// ends with exit code 2, one line naming that file and the problem, and
// no output folder.
func TestFitCorruptCompressed(t *testing.T) {
	for _, tc := range []struct {
		dir  string
		edit func(t *testing.T, b []byte) []byte
		want string
	}{
		{"ir-sv1", func(t *testing.T, b []byte) []byte {
			i := bytes.LastIndex(b, []byte{0xFF, 0xDA})
			if i < 0 {
				t.Fatal("no SOS marker")
			}
			for k := i + 12; k < i+60 && k < len(b)-16; k++ {
				b[k] = 0xFF // a run of fill bytes where entropy-coded data should be
			}
			return b
		}, "malformed compressed pixel data: JPEG"},
		{"ir-rle", func(t *testing.T, b []byte) []byte {
			i := bytes.Index(b, []byte("\xe0\x7f\x10\x00OB\x00\x00\xff\xff\xff\xff"))
			if i < 0 {
				t.Fatal("no encapsulated pixel data")
			}
			i += 12
			i += 8 + int(binary.LittleEndian.Uint32(b[i+4:]))
			b[i+8] = 1
			return b
		}, "RLE header lists 1 segments; 16-bit grey-scale samples need 2"},
	} {
		dir := filepath.Join(t.TempDir(), tc.dir)
		if err := os.MkdirAll(dir, 0o755); err != nil {
			t.Fatal(err)
		}
		files, _ := filepath.Glob(filepath.Join("../../testdata/dicom/codecs", tc.dir, "*"))
		var victim string
		for i, f := range files {
			b, err := os.ReadFile(f)
			if err != nil {
				t.Fatal(err)
			}
			p := filepath.Join(dir, filepath.Base(f))
			if i == 5 {
				b, victim = tc.edit(t, b), p
			}
			if err := os.WriteFile(p, b, 0o644); err != nil {
				t.Fatal(err)
			}
		}
		out := filepath.Join(t.TempDir(), "out")
		code, _, stderr := tauvox(t, "fit", dir, "--model", "t1-ir", "--out", out)
		line := strings.TrimSpace(stderr)
		if code != 2 || strings.Contains(line, "\n") || !strings.Contains(line, victim) || !strings.Contains(line, tc.want) {
			t.Errorf("%s: exit %d, %q; want one line naming %s and %q", tc.dir, code, line, victim, tc.want)
		}
		if _, err := os.Stat(out); !os.IsNotExist(err) {
			t.Errorf("%s: output written", tc.dir)
		}
		t.Log(line)
	}
}
