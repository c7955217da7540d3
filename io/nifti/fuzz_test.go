package nifti

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// FuzzDecode feeds arbitrary bytes to Decode, seeded with every NIfTI file
// in testdata/nifti (style.md; as image/png/fuzz_test.go). Decode must not
// panic, must return one-line errors that start with the name, and any
// image it returns must be self-consistent; a decoded image must survive a
// write and read back unchanged.
func FuzzDecode(f *testing.F) {
	for _, pat := range []string{"*.nii", "*.nii.gz", "*.hdr", "written-by-tauvox/*.nii*"} {
		files, _ := filepath.Glob(filepath.Join(testdata, pat))
		for _, p := range files {
			if b, err := os.ReadFile(p); err == nil {
				f.Add(b)
			}
		}
	}
	f.Add(validFile(1))
	f.Add(validFile(2))
	f.Add(gz(validFile(2)))
	rd := &Reader{MaxBytes: 1 << 22}
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, data []byte) {
		for _, size := range []int64{int64(len(data)), -1} {
			im, h, err := rd.Decode(bytes.NewReader(data), "fuzz.nii", size)
			if err != nil {
				if s := err.Error(); !strings.HasPrefix(s, "fuzz.nii: nifti: ") || strings.ContainsAny(s, "\n\r") {
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
			if !finiteAffine(&im.Affine) {
				continue // Write refuses these, as it should
			}
			p := filepath.Join(dir, "rt.nii")
			if err := Write(p, im, nil); err != nil {
				t.Fatal(err)
			}
			back, err := rd.Read(p)
			if err != nil {
				t.Fatal(err)
			}
			if back.Dims != im.Dims || !equalData(back.Data, im.Data) {
				t.Fatal("write/read round trip changed the image")
			}
		}
	})
}
