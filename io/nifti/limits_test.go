package nifti

import (
	"bytes"
	"compress/gzip"
	"io"
	"math/rand"
	"testing"
)

// countingReader counts the bytes read through it.
type countingReader struct {
	r io.Reader
	n int64
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += int64(n)
	return n, err
}

// TestGzipBoundedByHeader: the decompression of a .nii.gz is bounded by
// what the header declares: a valid 2×2×2 file followed, inside the same
// gzip stream, by 8 MiB of incompressible bytes decodes to the declared 8
// samples after reading only a small part of the compressed stream (the
// rest is never inflated), so a small file cannot make Decode inflate
// gigabytes. A header that declares more than MaxBytes is refused before
// any sample is read (the header alone is consumed).
func TestGzipBoundedByHeader(t *testing.T) {
	tail := make([]byte, 8<<20)
	rand.New(rand.NewSource(1)).Read(tail)
	var z bytes.Buffer
	w := gzip.NewWriter(&z)
	w.Write(validFile(1))
	w.Write(tail)
	w.Close()
	cr := &countingReader{r: bytes.NewReader(z.Bytes())}
	im, _, err := Decode(cr, "bomb.nii.gz", int64(z.Len()))
	if err != nil {
		t.Fatal(err)
	}
	if len(im.Data) != 8 {
		t.Fatalf("%d samples, want 8", len(im.Data))
	}
	t.Logf("read %d of %d compressed bytes", cr.n, z.Len())
	if cr.n > 1<<20 {
		t.Errorf("read %d of %d compressed bytes: the trailing data was inflated", cr.n, z.Len())
	}

	big := validFile(1)
	for i, v := range []int16{4, 1000, 1000, 1000, 1} { // 1e9 samples, 4 GB as float32
		big[40+2*i], big[41+2*i] = byte(v), byte(v>>8)
	}
	cr = &countingReader{r: bytes.NewReader(gz(big))}
	_, _, err = (&Reader{MaxBytes: 1 << 20}).Decode(cr, "big.nii.gz", -1)
	if err == nil {
		t.Fatal("a 4 GB header was accepted under a 1 MiB limit")
	}
	t.Logf("%v", err)
}
