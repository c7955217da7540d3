package gzruns

import (
	"bytes"
	"compress/gzip"
	"encoding/binary"
	"io"
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
)

// mapLike returns n float32 samples, little-endian: a disc of noisy
// values in a background of NaN (or of bg), as the maps of a fit.
func mapLike(r *rand.Rand, nx, ny, nz int, bg float32) []byte {
	b := make([]byte, 0, 4*nx*ny*nz)
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				x, y := float64(i-nx/2), float64(j-ny/2)
				v := bg
				if x*x+y*y < float64(nx*nx)/5 {
					v = float32(80 + 10*r.NormFloat64())
				}
				b = binary.LittleEndian.AppendUint32(b, math.Float32bits(v))
			}
		}
	}
	return b
}

func compress(t testing.TB, parts ...[]byte) []byte {
	t.Helper()
	var buf bytes.Buffer
	z := NewWriter(&buf)
	for _, p := range parts {
		if n, err := z.Write(p); err != nil || n != len(p) {
			t.Fatalf("Write = %d, %v; want %d, nil", n, err, len(p))
		}
	}
	if err := z.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// TestRoundTrip checks the members against Go's own gzip reader (which
// checks the CRC-32 and length of the trailer, RFC 1952 §2.3.1) on
// inputs that exercise every path: empty, a byte, runs of every length
// around the match limits (3, 258, 259, 260, 261, 516), runs straddling
// writes and blocks, all-distinct bytes, one repeated byte, map-like
// float32 samples with NaN and 0 backgrounds, and a skewed byte
// distribution deep enough to need the 15-bit limit.
func TestRoundTrip(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	random := func(n int) []byte {
		b := make([]byte, n)
		for i := range b {
			b[i] = byte(r.Uint32())
		}
		return b
	}
	runOf := func(n int) []byte {
		b := random(4)
		for len(b) < n {
			b = append(b, b[len(b)-4])
		}
		return b
	}
	// Counts that grow like Fibonacci numbers make the deepest optimal
	// Huffman code (a 1-2-3-... chain), past 15 bits.
	var skewed []byte
	f0, f1 := 1, 1
	for s := 0; s < 25; s++ {
		for range f0 {
			skewed = append(skewed, byte(s))
		}
		f0, f1 = f1, f0+f1
	}
	r.Shuffle(len(skewed), func(i, j int) { skewed[i], skewed[j] = skewed[j], skewed[i] })
	cases := map[string][][]byte{
		"empty":      nil,
		"one byte":   {{7}},
		"random":     {random(100_000)},
		"zeros":      {make([]byte, 1_000_000)},
		"skewed":     {skewed},
		"nan map":    {mapLike(r, 64, 64, 20, float32(math.NaN()))},
		"zero map":   {mapLike(r, 50, 70, 9, 0)},
		"many parts": {random(3), runOf(100), random(1), runOf(600), mapLike(r, 30, 30, 3, 0)},
		"big block":  {append(random(blockBytes-10), runOf(5000)...)},
	}
	for _, n := range []int{3, 16, 17, 19, 20, 258, 259, 260, 261, 262, 263, 516, 517, 518, 1000} {
		cases["run "+strconv.Itoa(n)] = [][]byte{random(9), runOf(n + 4), random(9)}
	}
	for name, parts := range cases {
		z := compress(t, parts...)
		zr, err := gzip.NewReader(bytes.NewReader(z))
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		got, err := io.ReadAll(zr)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if want := bytes.Join(parts, nil); !bytes.Equal(got, want) {
			t.Errorf("%s: read back %d bytes, want %d (equal: false)", name, len(got), len(want))
		}
	}
}

// TestMapRatio checks that a map-like image compresses about as well as
// gzip's fastest level: the background runs to almost nothing, the
// noise-like samples by the entropy of their bytes.
func TestMapRatio(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	p := mapLike(r, 128, 128, 16, float32(math.NaN()))
	z := compress(t, p)
	var ref bytes.Buffer
	g, _ := gzip.NewWriterLevel(&ref, gzip.BestSpeed)
	g.Write(p)
	g.Close()
	t.Logf("%d bytes: gzruns %d (%.1f %%), gzip level 1 %d (%.1f %%)", len(p), len(z), 100*float64(len(z))/float64(len(p)), ref.Len(), 100*float64(ref.Len())/float64(len(p)))
	if float64(len(z)) > 1.05*float64(ref.Len()) {
		t.Errorf("gzruns %d bytes, more than 5 %% above gzip level 1 (%d)", len(z), ref.Len())
	}
}

func TestWriteAfterClose(t *testing.T) {
	z := NewWriter(io.Discard)
	z.Close()
	if _, err := z.Write([]byte{1}); err != ErrClosed {
		t.Errorf("Write after Close: %v, want ErrClosed", err)
	}
}
