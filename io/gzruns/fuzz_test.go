package gzruns

import (
	"bytes"
	"compress/gzip"
	"io"
	"math"
	"math/rand/v2"
	"testing"
)

// FuzzRoundTrip: whatever is written, Go's gzip reader reads back the
// same bytes (and finds the CRC-32 and length right). Seeds: a map-like
// image, runs around the match limits, text.
func FuzzRoundTrip(f *testing.F) {
	f.Add(mapLike(rand.New(rand.NewPCG(1, 1)), 20, 20, 2, float32(math.NaN())))
	f.Add(bytes.Repeat([]byte{1, 2, 3, 4}, 130))
	f.Add([]byte("echo time, repetition time, echo time, echo time"))
	f.Fuzz(func(t *testing.T, p []byte) {
		var buf bytes.Buffer
		z := NewWriter(&buf)
		half := len(p) / 2
		z.Write(p[:half])
		z.Write(p[half:])
		if err := z.Close(); err != nil {
			t.Fatal(err)
		}
		zr, err := gzip.NewReader(&buf)
		if err != nil {
			t.Fatal(err)
		}
		got, err := io.ReadAll(zr)
		if err != nil || !bytes.Equal(got, p) {
			t.Fatalf("read back %d bytes, %v; want the %d written", len(got), err, len(p))
		}
	})
}
