package gzsplit

import (
	"bytes"
	stdgzip "compress/gzip"
	"io"
	"math/rand/v2"
	"testing"
)

// TestHead decodes whole gzip members written by Go's compress/gzip at
// levels 0 (stored blocks), 1, 6 and 9, with and without the optional
// header fields (name, comment, extra), reading the output in pieces of
// random sizes, and checks the bytes, the end of the stream (where the
// 8-byte trailer begins) and io.EOF after it.
func TestHead(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 9))
	for _, kind := range []string{"float", "text", "random"} {
		data := testData(kind, 300_000, 3)
		for _, level := range []int{0, 1, 6, 9} {
			for _, fields := range []bool{false, true} {
				var buf bytes.Buffer
				w, _ := stdgzip.NewWriterLevel(&buf, level)
				if fields {
					w.Name, w.Comment, w.Extra = "series.nii", "made by a test", []byte{'T', 'V', 3, 0, 1, 2, 3}
				}
				w.Write(data)
				w.Close()
				z := buf.Bytes()
				start, err := MemberData(z)
				if err != nil {
					t.Fatal(err)
				}
				h := NewHead(z, start)
				var got []byte
				p := make([]byte, 70_000)
				for {
					n, err := h.Read(p[:1+r.IntN(len(p))])
					got = append(got, p[:n]...)
					if err == io.EOF {
						break
					}
					if err != nil {
						t.Fatalf("%s level %d: %v", kind, level, err)
					}
				}
				if !bytes.Equal(got, data) {
					t.Errorf("%s level %d fields %v: %d bytes decoded, differ from the %d written", kind, level, fields, len(got), len(data))
				}
				if h.End() != len(z)-8 {
					t.Errorf("%s level %d: End %d, want %d", kind, level, h.End(), len(z)-8)
				}
			}
		}
	}
}

// TestHeadCorrupt: damaged data give an error, not wrong bytes without
// one, and a header that is not gzip is refused.
func TestHeadCorrupt(t *testing.T) {
	data := testData("float", 200_000, 4)
	var buf bytes.Buffer
	w, _ := stdgzip.NewWriterLevel(&buf, 6)
	w.Write(data)
	w.Close()
	z := bytes.Clone(buf.Bytes())
	start, _ := MemberData(z)
	z[start+len(z)/3] ^= 0x40
	got, err := io.ReadAll(NewHead(z, start))
	if err == nil && bytes.Equal(got, data) {
		t.Error("a flipped bit changed nothing")
	}
	if err == nil {
		t.Logf("flipped bit decodes without error to other bytes (%d of %d): the caller's CRC check catches it", len(got), len(data))
	}
	if _, err := MemberData([]byte("not gzip at all")); err == nil {
		t.Error("MemberData accepted text")
	}
}
