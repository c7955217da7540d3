package nifti

import (
	"bytes"
	stdgzip "compress/gzip"
	"errors"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// splitSeries returns a 64×64×8×16 multi-echo series of noisy decays
// (2 MiB as float32); the tests lower minSplitBytes so that it is split,
// and releaseBytes so that the pages read are given back on the way.
func splitSeries(t *testing.T) *volume.Image {
	oldMin, oldChunk, oldRelease := minSplitBytes, seqChunkBytes, releaseBytes
	minSplitBytes, seqChunkBytes, releaseBytes = 64<<10, 16<<10, 16<<10
	t.Cleanup(func() { minSplitBytes, seqChunkBytes, releaseBytes = oldMin, oldChunk, oldRelease })
	im := &volume.Image{Dims: [4]int{64, 64, 8, 16}, Affine: volume.Identity()}
	im.Data = make([]float32, 64*64*8*16)
	r := rand.New(rand.NewPCG(5, 6))
	nv := 64 * 64 * 8
	for t := 0; t < 16; t++ {
		for v := 0; v < nv; v++ {
			t2 := 20 + float64(v%300)
			s := 1000*math.Exp(-float64(10*(t+1))/t2) + 10*r.NormFloat64()
			im.Data[t*nv+v] = float32(math.Abs(s))
		}
	}
	return im
}

// gzipWith writes im as .nii at a temporary path, then compresses that
// file with Go's standard compress/gzip at level, so that the gzip stream
// comes from another writer than tauvox's.
func gzipWith(t *testing.T, im *volume.Image, level int, mutate func([]byte)) string {
	t.Helper()
	dir := t.TempDir()
	plain := filepath.Join(dir, "s.nii")
	if err := Write(plain, im, nil); err != nil {
		t.Fatal(err)
	}
	raw, err := os.ReadFile(plain)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	w, _ := stdgzip.NewWriterLevel(&buf, level)
	w.Write(raw)
	w.Close()
	z := buf.Bytes()
	if mutate != nil {
		mutate(z)
	}
	p := filepath.Join(dir, "s.nii.gz")
	if err := os.WriteFile(p, z, 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func readWhole(t *testing.T, path string, split bool) ([]float32, bool, error) {
	t.Helper()
	r, err := OpenSlabs(path, &SlabOptions{TempDir: t.TempDir()})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if split {
		r.SplitMemory = 1 << 30
	}
	d := r.Dims()
	dst := make([]float32, d[0]*d[1]*d[2]*d[3])
	var vols []int
	r.VolumeDone = func(i int, vol []float32) { vols = append(vols, i) }
	err = r.ReadSlab(dst, 0, d[2], nil)
	if err == nil {
		for i, v := range vols {
			if v != i {
				t.Fatalf("VolumeDone order %v", vols)
			}
		}
		if len(vols) != d[3] {
			t.Fatalf("VolumeDone called for %d of %d volumes", len(vols), d[3])
		}
	}
	return dst, r.split, err
}

// TestSplitRead: a whole read of a .nii.gz whose second half is decoded
// speculatively (split.go, package gzsplit) gives the same samples, bit
// for bit, as the ordinary sequential read, for files compressed by Go's
// compress/gzip at levels 1, 6 and 9, and actually used the split.
func TestSplitRead(t *testing.T) {
	im := splitSeries(t)
	for _, level := range []int{1, 6, 9} {
		p := gzipWith(t, im, level, nil)
		want, _, err := readWhole(t, p, false)
		if err != nil {
			t.Fatal(err)
		}
		if !sameBits(want, im.Data) {
			t.Fatalf("level %d: sequential read differs from the image", level)
		}
		got, used, err := readWhole(t, p, true)
		if err != nil {
			t.Fatalf("level %d: %v", level, err)
		}
		if !used {
			t.Errorf("level %d: the split was not used", level)
		}
		if !sameBits(got, want) {
			t.Errorf("level %d: split read differs", level)
		}
	}
}

// TestSplitNoEnd: a file whose second half holds no dynamic block to
// start from (stored blocks only, gzip level 0) is read whole by the
// ordinary decoder beside the split, and its trailer checked: the right
// samples, the split not used; with the trailer's CRC-32 or length
// changed, an error.
func TestSplitNoEnd(t *testing.T) {
	im := splitSeries(t)
	p := gzipWith(t, im, 0, nil)
	got, used, err := readWhole(t, p, true)
	if err != nil || used || !sameBits(got, im.Data) {
		t.Errorf("stored blocks: error %v, split used %v, samples equal %v", err, used, err == nil && sameBits(got, im.Data))
	}
	for _, at := range []int{8, 4} { // CRC-32, ISIZE
		bad := gzipWith(t, im, 0, func(z []byte) { z[len(z)-at] ^= 1 })
		if _, _, err := readWhole(t, bad, true); err == nil {
			t.Errorf("trailer byte %d from the end changed: no error", at)
		}
	}
}

// TestSplitCorrupt: damage in the second half of the compressed data, or
// a second gzip member after the first, never yields wrong samples: the
// speculative end fails the CRC-32 of the trailer (or is not taken), the
// read falls back to the ordinary decoder, which reports the corruption
// (or reads both members).
func TestSplitCorrupt(t *testing.T) {
	im := splitSeries(t)
	// A flipped bit three quarters in: a decodable stream with other
	// bytes, or an invalid one.
	flip := gzipWith(t, im, 6, func(z []byte) { z[len(z)*3/4] ^= 0x10 })
	if _, used, err := readWhole(t, flip, true); err == nil {
		t.Error("flipped bit: no error")
	} else if used {
		t.Error("flipped bit: split used")
	} else {
		var fe *FormatError
		if !errors.As(err, &fe) {
			t.Errorf("flipped bit: %v, want a FormatError", err)
		}
		t.Logf("flipped bit: %v", err)
	}
	// Trailer CRC changed: everything decodes, the check must refuse.
	badCRC := gzipWith(t, im, 6, func(z []byte) { z[len(z)-8] ^= 1 })
	if _, used, err := readWhole(t, badCRC, true); err == nil || used {
		t.Errorf("bad trailer CRC: error %v, split used %v", err, used)
	}
	// Two members: the image split over two gzip members (as some
	// parallel compressors write).
	dir := t.TempDir()
	plain := filepath.Join(dir, "s.nii")
	if err := Write(plain, im, nil); err != nil {
		t.Fatal(err)
	}
	raw, _ := os.ReadFile(plain)
	var buf bytes.Buffer
	for _, part := range [][]byte{raw[:len(raw)/3], raw[len(raw)/3:]} {
		w, _ := stdgzip.NewWriterLevel(&buf, 6)
		w.Write(part)
		w.Close()
	}
	two := filepath.Join(dir, "two.nii.gz")
	os.WriteFile(two, buf.Bytes(), 0o644)
	got, _, err := readWhole(t, two, true)
	if err != nil || !sameBits(got, im.Data) {
		t.Errorf("two members: %v, equal %v", err, err == nil && sameBits(got, im.Data))
	}
}

// TestRunsCompression: a file written with RunsCompression (package
// gzruns, as tauvox writes its maps) reads back bit for bit, in order and
// with the split decoder (its blocks are dynamic blocks of 1 MiB of
// input, which the split finds like any other), and standard gzip reads
// it too.
func TestRunsCompression(t *testing.T) {
	base := splitSeries(t)
	im := &volume.Image{Dims: [4]int{64, 64, 8, 64}, Affine: volume.Identity()}
	for range 4 {
		im.Data = append(im.Data, base.Data...)
	}
	for i := 0; i < len(im.Data); i += 7 { // background runs
		if (i/4096)%3 == 0 {
			im.Data[i] = float32(math.NaN())
		}
	}
	p := filepath.Join(t.TempDir(), "r.nii.gz")
	if err := Write(p, im, &WriteOptions{Compression: RunsCompression}); err != nil {
		t.Fatal(err)
	}
	for _, split := range []bool{false, true} {
		got, used, err := readWhole(t, p, split)
		if err != nil {
			t.Fatal(err)
		}
		if !sameBits(got, im.Data) {
			t.Errorf("split %v: samples differ", split)
		}
		if split && !used {
			t.Error("the split was not used")
		}
	}
	f, _ := os.Open(p)
	defer f.Close()
	zr, err := stdgzip.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	if n, err := io.Copy(io.Discard, zr); err != nil || n != 352+4*int64(len(im.Data)) {
		t.Errorf("compress/gzip: %d bytes, %v", n, err)
	}
}

// FuzzSplitRead damages one byte of a compressed series (at a position
// and with a mask the fuzzer picks, past the first 4 KiB, which hold the
// header: a damaged header fails at open) and reads it whole with and
// without the split: where the ordinary decoder succeeds, the split
// gives the same samples bit for bit; where it fails, so does the split.
// Seeds: nothing changed, the middle, the trailer.
func FuzzSplitRead(f *testing.F) {
	f.Add(uint32(0), byte(0))
	f.Add(uint32(900_000), byte(0x10))
	f.Add(uint32(1<<31-8), byte(1))
	f.Fuzz(func(t *testing.T, at uint32, mask byte) {
		im := splitSeries(t)
		p := gzipWith(t, im, 1, func(z []byte) {
			k := 4096 + int(at)%(len(z)-4096)
			if at >= 1<<31-8 { // the trailer
				k = len(z) - 1 - int(at)%8
			}
			z[k] ^= mask
		})
		want, _, errSeq := readWhole(t, p, false)
		got, _, errSplit := readWhole(t, p, true)
		switch {
		case errSeq == nil && errSplit != nil:
			t.Fatalf("ordinary read fine, split: %v", errSplit)
		case errSeq != nil && errSplit == nil:
			t.Fatalf("ordinary read: %v, split read without error", errSeq)
		case errSeq == nil && !sameBits(got, want):
			t.Fatal("split read differs")
		}
	})
}
