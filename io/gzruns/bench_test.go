package gzruns

import (
	"io"
	"math"
	"math/rand/v2"
	"testing"

	kgzip "github.com/klauspost/compress/gzip"
)

// benchMap is a 256×256×24 float32 map (6.3 MB): a disc of noisy values
// (64 % of the voxels) in a NaN background, the shape of a fit's maps.
func benchMap() []byte {
	return mapLike(rand.New(rand.NewPCG(7, 8)), 256, 256, 24, float32(math.NaN()))
}

// BenchmarkWriteMap compresses the map with gzruns; BenchmarkWriteMapLevel1
// with klauspost/compress's gzip at BestSpeed (what maps were written
// with before). Both report the compressed size in percent of the input.
func BenchmarkWriteMap(b *testing.B) {
	benchWrite(b, func(w io.Writer) io.WriteCloser { return NewWriter(w) })
}

func BenchmarkWriteMapLevel1(b *testing.B) {
	benchWrite(b, func(w io.Writer) io.WriteCloser {
		z, _ := kgzip.NewWriterLevel(w, kgzip.BestSpeed)
		return z
	})
}

func benchWrite(b *testing.B, open func(io.Writer) io.WriteCloser) {
	p := benchMap()
	b.SetBytes(int64(len(p)))
	var c counter
	for b.Loop() {
		c = 0
		z := open(&c)
		z.Write(p)
		z.Close()
	}
	b.ReportMetric(100*float64(c)/float64(len(p)), "%size")
}

type counter int

func (c *counter) Write(p []byte) (int, error) {
	*c += counter(len(p))
	return len(p), nil
}
