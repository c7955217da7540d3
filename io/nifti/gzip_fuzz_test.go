package nifti

import (
	"bytes"
	"compress/gzip"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// FuzzDecodeGzip feeds arbitrary bytes, gzip-compressed by the test, to
// Decode as a .nii.gz, seeded with the decompressed content of every
// committed .nii.gz and plain .nii (style.md; image/png/fuzz_test.go).
// Compressing inside the target lets the fuzzer mutate the header and
// samples behind the gzip layer rather than the deflate stream; cut
// truncates the compressed stream. Decode must not panic, must bound what
// it inflates by what the header declares (Reader.MaxBytes), and must
// return one-line errors that start with the name.
func FuzzDecodeGzip(f *testing.F) {
	for _, pat := range []string{"*.nii", "*.nii.gz", "written-by-tauvox/*.nii*"} {
		files, _ := filepath.Glob(filepath.Join(testdata, pat))
		for _, p := range files {
			b, err := os.ReadFile(p)
			if err != nil || len(b) > 1<<16 {
				continue
			}
			if strings.HasSuffix(p, ".gz") {
				if b, err = gunzip(b); err != nil {
					continue
				}
			}
			f.Add(b, uint16(0))
		}
	}
	f.Add(validFile(1), uint16(0))
	f.Add(validFile(2), uint16(0))
	f.Add(validFile(1), uint16(7))
	rd := &Reader{MaxBytes: 1 << 22}
	f.Fuzz(func(t *testing.T, data []byte, cut uint16) {
		z := gz(data)
		if c := int(cut); c > 0 && c < len(z) {
			z = z[:len(z)-c]
		}
		for _, size := range []int64{int64(len(z)), -1} {
			im, h, err := rd.Decode(bytes.NewReader(z), "fuzz.nii.gz", size)
			if err != nil {
				if s := err.Error(); !strings.HasPrefix(s, "fuzz.nii.gz: nifti: ") || strings.ContainsAny(s, "\n\r") {
					t.Fatalf("bad error text %q", s)
				}
				continue
			}
			if h == nil {
				t.Fatal("nil header with nil error")
			}
			if err := im.Validate(); err != nil {
				t.Fatal(err)
			}
			if int64(len(im.Data))*4 > rd.MaxBytes {
				t.Fatalf("decoded %d samples beyond the %d-byte cap", len(im.Data), rd.MaxBytes)
			}
		}
	})
}

func gunzip(b []byte) ([]byte, error) {
	zr, err := gzip.NewReader(bytes.NewReader(b))
	if err != nil {
		return nil, err
	}
	defer zr.Close()
	return io.ReadAll(zr)
}
