package nifti

import (
	"compress/gzip"
	"math"
	"math/rand/v2"
	"path/filepath"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

var sinkImage *volume.Image

// benchImage is a 128×128×32×16 float32 series: a smooth disc of signal
// decaying over the volumes with Gaussian noise, about what a multi-echo
// series or a map looks like to gzip.
func benchImage() *volume.Image {
	im := volume.New(128, 128, 32, 16)
	im.Affine = obliqueFlip()
	rng := rand.New(rand.NewPCG(1, 2))
	i := 0
	for t := 0; t < 16; t++ {
		decay := math.Exp(-float64(t) / 6)
		for k := 0; k < 32; k++ {
			for y := 0; y < 128; y++ {
				for x := 0; x < 128; x++ {
					r := math.Hypot(float64(x-64), float64(y-64))
					s := 0.0
					if r < 50 {
						s = 1000 * decay
					}
					im.Data[i] = float32(s + 20*rng.NormFloat64())
					i++
				}
			}
		}
	}
	return im
}

func benchmarkWrite(b *testing.B, name string, level int) {
	im := benchImage()
	path := filepath.Join(b.TempDir(), name)
	opt := &WriteOptions{Compression: level}
	b.SetBytes(int64(4 * len(im.Data)))
	b.ReportAllocs()
	for b.Loop() {
		if err := Write(path, im, opt); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkWriteNii(b *testing.B)          { benchmarkWrite(b, "w.nii", 0) }
func BenchmarkWriteNiiGzSpeed(b *testing.B)   { benchmarkWrite(b, "w.nii.gz", gzip.BestSpeed) }
func BenchmarkWriteNiiGzDefault(b *testing.B) { benchmarkWrite(b, "w.nii.gz", gzip.DefaultCompression) }

func benchmarkRead(b *testing.B, name string, level int) {
	im := benchImage()
	path := filepath.Join(b.TempDir(), name)
	if err := Write(path, im, &WriteOptions{Compression: level}); err != nil {
		b.Fatal(err)
	}
	b.SetBytes(int64(4 * len(im.Data)))
	b.ReportAllocs()
	for b.Loop() {
		var err error
		if sinkImage, err = Read(path); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkReadNii(b *testing.B)          { benchmarkRead(b, "r.nii", 0) }
func BenchmarkReadNiiGzSpeed(b *testing.B)   { benchmarkRead(b, "r.nii.gz", gzip.BestSpeed) }
func BenchmarkReadNiiGzDefault(b *testing.B) { benchmarkRead(b, "r.nii.gz", gzip.DefaultCompression) }
