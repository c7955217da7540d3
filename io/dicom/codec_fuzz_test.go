package dicom

import (
	"os"
	"path/filepath"
	"testing"
)

// frameOf returns the first frame stream of a committed compressed file.
func frameOf(t testing.TB, name string) []byte {
	rf, err := readHead(filepath.Join(testdata, "codecs", name), 1<<20)
	if err != nil {
		t.Fatal(err)
	}
	offsets, frags, err := fragments(rf, 1<<24)
	if err != nil {
		t.Fatal(err)
	}
	s, err := frameStreams(rf, offsets, frags, 1)
	if err != nil {
		t.Fatal(err)
	}
	return s[0]
}

// FuzzRLE: decodeRLE never panics and never writes past its buffer, for
// any frame bytes and any sample size; seeds are the dcmtk and GDCM RLE
// frames of testdata/dicom/codecs.
func FuzzRLE(f *testing.F) {
	for _, n := range []string{"mr-rle-dcmtk.dcm", "mr-rle-gdcm.dcm"} {
		f.Add(frameOf(f, n), uint8(64), uint8(64), uint8(2))
	}
	f.Add([]byte{}, uint8(1), uint8(1), uint8(1))
	f.Fuzz(func(t *testing.T, src []byte, rows, cols, bps uint8) {
		n := int(rows) * int(cols)
		b := int(bps%4) + 1
		dst := make([]byte, n*b)
		_ = decodeRLE(dst, src, n, b)
	})
}

// FuzzLosslessJPEG: decodeLosslessJPEG never panics, for any stream and
// matrix; seeds are dcmtk's process 14 streams with selection values 1–7
// and the 8-bit ones.
func FuzzLosslessJPEG(f *testing.F) {
	files, _ := filepath.Glob(filepath.Join(testdata, "codecs", "mr*-*sv*.dcm"))
	for _, p := range files {
		f.Add(frameOf(f, filepath.Base(p)), uint16(64), uint16(64), uint8(2))
	}
	if b, err := os.ReadFile(filepath.Join(testdata, "codecs", "mr8-sv1.dcm")); err == nil {
		f.Add(b, uint16(8), uint16(8), uint8(1))
	}
	f.Fuzz(func(t *testing.T, src []byte, rows, cols uint16, bps uint8) {
		r, c := int(rows%512)+1, int(cols%512)+1
		b := int(bps%2) + 1
		dst := make([]byte, r*c*b)
		_ = decodeLosslessJPEG(dst, src, r, c, b)
	})
}

// BenchmarkDecodeLosslessJPEG decodes dcmtk's SV1 stream of MR_small
// (64×64, 16-bit) per iteration.
func BenchmarkDecodeLosslessJPEG(b *testing.B) {
	src := frameOf(b, "mr-sv1.dcm")
	dst := make([]byte, 64*64*2)
	b.SetBytes(int64(len(dst)))
	for i := 0; i < b.N; i++ {
		if err := decodeLosslessJPEG(dst, src, 64, 64, 2); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkDecodeRLE decodes dcmtk's RLE frame of MR_small per iteration.
func BenchmarkDecodeRLE(b *testing.B) {
	src := frameOf(b, "mr-rle-dcmtk.dcm")
	dst := make([]byte, 64*64*2)
	b.SetBytes(int64(len(dst)))
	for i := 0; i < b.N; i++ {
		if err := decodeRLE(dst, src, 64*64, 2); err != nil {
			b.Fatal(err)
		}
	}
}
