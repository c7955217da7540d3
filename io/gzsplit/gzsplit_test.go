package gzsplit

import (
	"bytes"
	stdflate "compress/flate"
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"testing"

	kflate "github.com/klauspost/compress/flate"
)

// testData returns n bytes of three kinds: float32 samples of a noisy
// multi-echo decay (like a NIfTI series), repetitive text, and random
// bytes (which deflate stores).
func testData(kind string, n int, seed uint64) []byte {
	r := rand.New(rand.NewPCG(seed, 7))
	out := make([]byte, 0, n)
	switch kind {
	case "float":
		for len(out)+4 <= n {
			t := float64(len(out)/4%16+1) * 10
			v := 1000*math.Exp(-t/80) + 10*r.NormFloat64()
			out = binary.LittleEndian.AppendUint32(out, math.Float32bits(float32(math.Abs(v))))
		}
	case "text":
		words := []string{"echo ", "time ", "relaxation ", "phantom ", "vial ", "T2 ", "T1 ", "\n"}
		for len(out) < n {
			out = append(out, words[r.IntN(len(words))]...)
		}
	default:
		for len(out) < n {
			out = append(out, byte(r.Uint32()))
		}
	}
	return out[:n]
}

type compressor struct {
	name string
	make func(*bytes.Buffer) interface {
		Write([]byte) (int, error)
		Close() error
	}
}

func compressors() []compressor {
	var cs []compressor
	for _, l := range []int{0, 1, 6, 9, -2} {
		cs = append(cs, compressor{fmt.Sprintf("compress/flate level %d", l), func(b *bytes.Buffer) interface {
			Write([]byte) (int, error)
			Close() error
		} {
			w, _ := stdflate.NewWriter(b, l)
			return w
		}})
	}
	for _, l := range []int{1, 5, 9} {
		cs = append(cs, compressor{fmt.Sprintf("klauspost level %d", l), func(b *bytes.Buffer) interface {
			Write([]byte) (int, error)
			Close() error
		} {
			w, _ := kflate.NewWriter(b, l)
			return w
		}})
	}
	return cs
}

// TestTailMatchesStream: for deflate streams written by Go's compress/flate
// (levels 0, 1, 6, 9 and Huffman-only) and by klauspost/compress (1, 5,
// 9) over float samples, text and random bytes, a tail found near the
// middle decodes, once resolved with the true 32 KiB before it, to
// exactly the end of the original data, and ends where the stream ends.
func TestTailMatchesStream(t *testing.T) {
	for _, kind := range []string{"float", "text", "random"} {
		data := testData(kind, 1<<20, 1)
		for _, c := range compressors() {
			var buf bytes.Buffer
			w := c.make(&buf)
			w.Write(data)
			w.Close()
			z := buf.Bytes()
			start, ok := Find(z, len(z)/2, len(z))
			if !ok {
				// Only right when the second half holds no dynamic block
				// (stored data: random bytes, level 0, or what klauspost's
				// fast levels judge incompressible).
				if n := dynamicBlocks(t, z, len(z)/2); n > 0 {
					t.Errorf("%s, %s: no block found, but the stream has %d dynamic blocks there", kind, c.name, n)
				}
				continue
			}
			tail, err := Decode(z, start, 0)
			if err != nil {
				t.Errorf("%s, %s: decode from bit %d: %v", kind, c.name, start, err)
				continue
			}
			n := tail.Len()
			if n == 0 || n > len(data)-windowSize {
				t.Errorf("%s, %s: tail of %d bytes", kind, c.name, n)
				continue
			}
			head, rest, err := tail.Resolve(data[len(data)-n-windowSize : len(data)-n])
			if err != nil {
				t.Fatal(err)
			}
			got := append(head, rest...)
			if !bytes.Equal(got, data[len(data)-n:]) {
				t.Errorf("%s, %s: tail differs from the data", kind, c.name)
			}
			if tail.End != len(z) {
				t.Errorf("%s, %s: stream end %d, want %d", kind, c.name, tail.End, len(z))
			}
			t.Logf("%s, %s: %d of %d compressed bytes, tail %d bytes (%d with placeholders)", kind, c.name, len(z)-int(start/8), len(z), n, len(tail.head))
		}
	}
}

// dynamicBlocks walks the stream z from its start and counts the dynamic
// blocks that begin at or after byte offset from.
func dynamicBlocks(t *testing.T, z []byte, from int) int {
	b := &bits{data: z}
	b.refill()
	var out []byte
	var lit, dist huffman
	n := 0
	for final := false; !final; {
		p := b.bitPos()
		b.need(3)
		if (b.buf>>1)&3 == 2 && p >= int64(from)*8 {
			n++
		}
		var err error
		if out, final, err = block(b, out, &lit, &dist); err != nil {
			t.Fatalf("stream does not decode from its start: %v", err)
		}
	}
	return n
}

// TestCombineCRC: the combined CRC-32 equals hash/crc32 of the
// concatenation, for lengths 0 to 100,000 bytes of both parts.
func TestCombineCRC(t *testing.T) {
	data := testData("random", 200000, 9)
	for _, la := range []int{0, 1, 7, 1000, 100000} {
		for _, lb := range []int{0, 1, 3, 4096, 99999} {
			a, b := data[:la], data[la:la+lb]
			want := crc32.ChecksumIEEE(data[:la+lb])
			if got := CombineCRC(crc32.ChecksumIEEE(a), crc32.ChecksumIEEE(b), int64(lb)); got != want {
				t.Errorf("lengths %d+%d: %08x, want %08x", la, lb, got, want)
			}
		}
	}
}

// BenchmarkInflate compares this package's decoder (Decode from the
// stream's first block, which is what the speculative half runs) with
// klauspost/compress's on the same 8 MiB of float samples compressed by
// compress/flate at level 6; MB/s are of decompressed output.
func BenchmarkInflate(b *testing.B) {
	data := testData("float", 8<<20, 2)
	var buf bytes.Buffer
	w, _ := stdflate.NewWriter(&buf, 6)
	w.Write(data)
	w.Close()
	z := buf.Bytes()
	b.Run("gzsplit", func(b *testing.B) {
		b.SetBytes(int64(len(data)))
		for b.Loop() {
			if _, err := Decode(z, 0, len(data)); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("klauspost", func(b *testing.B) {
		b.SetBytes(int64(len(data)))
		out := make([]byte, len(data))
		for b.Loop() {
			r := kflate.NewReader(bytes.NewReader(z))
			if _, err := io.ReadFull(r, out); err != nil {
				b.Fatal(err)
			}
		}
	})
}

// TestPlausibleQuickCheck: the completeness test of the code-length code
// that plausible makes first (clComplete, RFC 1951 §3.2.7: a complete
// prefix code has Kraft sum 1) rejects no position that the full header
// check (dynamicHeader) accepts, and accepts every true block start: over
// every bit position of the first 64 KiB of streams from each compressor
// of TestTailMatchesStream, both tests give the same answer.
func TestPlausibleQuickCheck(t *testing.T) {
	for _, c := range compressors() {
		var buf bytes.Buffer
		w := c.make(&buf)
		w.Write(testData("float", 1<<20, 3))
		w.Close()
		z := buf.Bytes()
		limit := min(len(z)-8, 64<<10)
		accepted := 0
		for pos := int64(0); pos < int64(limit)*8; pos++ {
			b := &bits{data: z, pos: int(pos / 8)}
			b.refill()
			b.take(uint(pos % 8))
			b.take(3)
			var lit, dist huffman
			full := b.dynamicHeader(&lit, &dist) == nil
			if got := plausible(z, pos); got != full {
				t.Fatalf("%s: bit %d: plausible %v, full header check %v", c.name, pos, got, full)
			}
			if full {
				accepted++
			}
		}
		t.Logf("%s: %d positions of %d accepted", c.name, accepted, limit*8)
	}
}

// TestResolveHalves: a head of placeholders large enough to be filled in
// two halves at once resolves to the same bytes as one pass, element by
// element (literals kept, each placeholder from its window byte).
func TestResolveHalves(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 12))
	win := make([]byte, windowSize)
	for i := range win {
		win[i] = byte(r.Uint32())
	}
	for _, n := range []int{10, 1<<20 - 1, 1 << 20, 3_000_001} {
		tl := &Tail{head: make([]uint16, n), rest: []byte{1, 2, 3}}
		for i := range tl.head {
			if r.IntN(3) == 0 {
				tl.head[i] = uint16(marker + r.IntN(windowSize))
			} else {
				tl.head[i] = uint16(r.IntN(256))
			}
		}
		head, rest, err := tl.Resolve(win)
		if err != nil || len(head) != n || !bytes.Equal(rest, tl.rest) {
			t.Fatalf("n=%d: %d bytes, rest %v, err %v", n, len(head), rest, err)
		}
		for i, v := range tl.head {
			want := byte(v)
			if v >= marker {
				want = win[v-marker]
			}
			if head[i] != want {
				t.Fatalf("n=%d: byte %d = %d, want %d", n, i, head[i], want)
			}
		}
	}
}

// BenchmarkInflateFile decodes, in one goroutine, the whole deflate stream
// of the gzip file named by $TAUVOX_BENCH_GZ (from its first block, as
// Decode would a tail; skipped when unset). docs/benchmarks.md runs it on
// the 47 MB .nii.gz that testdata/gen/dicom_peers_bench.py writes (float32
// samples, nibabel's gzip level 1), whose matches are short and far back
// unlike BenchmarkInflate's.
func BenchmarkInflateFile(b *testing.B) {
	path := os.Getenv("TAUVOX_BENCH_GZ")
	if path == "" {
		b.Skip("TAUVOX_BENCH_GZ is not set")
	}
	data, err := os.ReadFile(path)
	if err != nil {
		b.Fatal(err)
	}
	start, err := MemberData(data)
	if err != nil {
		b.Fatal(err)
	}
	n := int(binary.LittleEndian.Uint32(data[len(data)-4:]))
	b.SetBytes(int64(n))
	for b.Loop() {
		if _, err := Decode(data, int64(start)*8, n); err != nil {
			b.Fatal(err)
		}
	}
}
