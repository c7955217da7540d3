package nifti

import (
	"bytes"
	"errors"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// slabOf returns slices z0…z1−1 of the given volumes of im, volume after
// volume: what ReadSlab must produce.
func slabOf(im *volume.Image, z0, z1 int, vols []int) []float32 {
	nx, ny := im.Dims[0], im.Dims[1]
	var out []float32
	for _, t := range vols {
		v := im.Volume(t)
		out = append(out, v[z0*nx*ny:z1*nx*ny]...)
	}
	return out
}

func sameBits(a, b []float32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float32bits(a[i]) != math.Float32bits(b[i]) {
			return false
		}
	}
	return true
}

// TestSlabsMatchRead reads every committed test file (written by nibabel,
// testdata/gen/nifti_refs.py: every datatype, both byte orders, scaling,
// NIfTI-2, a .hdr/.img pair) and a 4-D image written plain and compressed,
// slab by slab, and compares with Read bit for bit.
func TestSlabsMatchRead(t *testing.T) {
	files, err := filepath.Glob("../../testdata/nifti/*.nii*")
	if err != nil {
		t.Fatal(err)
	}
	files = append(files, "../../testdata/nifti/pair_i16.hdr")
	dir := t.TempDir()
	im := testImage(3)
	im.Dims = [4]int{5, 4, 7, 3}
	im.Data = make([]float32, 5*4*7*3)
	for i := range im.Data {
		im.Data[i] = float32(i)*0.25 - 3
	}
	im.Data[17] = float32(math.NaN())
	for _, name := range []string{"s.nii", "s.nii.gz"} {
		p := filepath.Join(dir, name)
		if err := Write(p, im, nil); err != nil {
			t.Fatal(err)
		}
		files = append(files, p)
	}
	for _, path := range files {
		want, err := Read(path)
		if err != nil {
			t.Fatalf("%s: %v", path, err)
		}
		nz, nt := want.Dims[2], want.Dims[3]
		all := make([]int, nt)
		for i := range all {
			all[i] = i
		}
		// Whole image first (the sequential plan for gzip), then slabs of
		// every size, then a subset of volumes in another order.
		plans := [][3]int{{0, nz, 0}}
		for size := 1; size <= nz; size++ {
			for z := 0; z < nz; z += size {
				plans = append(plans, [3]int{z, min(z+size, nz), 0})
			}
		}
		r, err := OpenSlabs(path, &SlabOptions{TempDir: dir})
		if err != nil {
			t.Fatalf("%s: %v", path, err)
		}
		if r.Dims() != want.Dims || r.Affine() != want.Affine {
			t.Fatalf("%s: dims/affine differ from Read", path)
		}
		for _, p := range plans {
			per := want.Dims[0] * want.Dims[1] * (p[1] - p[0])
			got := make([]float32, per*nt)
			if err := r.ReadSlab(got, p[0], p[1], nil); err != nil {
				t.Fatalf("%s slab %v: %v", path, p, err)
			}
			if !sameBits(got, slabOf(want, p[0], p[1], all)) {
				t.Fatalf("%s slab %v differs from Read", path, p)
			}
		}
		if nt > 1 {
			vols := []int{nt - 1, 0}
			got := make([]float32, want.Dims[0]*want.Dims[1]*nz*2)
			if err := r.ReadSlab(got, 0, nz, vols); err != nil {
				t.Fatal(err)
			}
			if !sameBits(got, slabOf(want, 0, nz, vols)) {
				t.Fatalf("%s: volume subset differs", path)
			}
		}
		// On Unix the copy is unlinked as soon as it is made, so not even
		// a killed process leaves it behind.
		if left, _ := filepath.Glob(filepath.Join(dir, ".tauvox-*")); r.Spilled() && runtime.GOOS != "windows" && len(left) > 0 {
			t.Fatalf("%s: temporary copy visible while open: %v", path, left)
		}
		tmp := r.tmp
		if err := r.Close(); err != nil {
			t.Fatal(err)
		}
		if tmp != "" {
			if _, err := os.Stat(tmp); !errors.Is(err, os.ErrNotExist) {
				t.Fatalf("%s: temporary copy %s not removed", path, tmp)
			}
		}
	}
	left, _ := filepath.Glob(filepath.Join(dir, ".tauvox-*"))
	if len(left) > 0 {
		t.Fatalf("temporary files left: %v", left)
	}
}

func TestSlabsBroken(t *testing.T) {
	dir := t.TempDir()
	im := testImage(2)
	var buf bytes.Buffer
	p := filepath.Join(dir, "a.nii")
	if err := Write(p, im, nil); err != nil {
		t.Fatal(err)
	}
	b, _ := os.ReadFile(p)
	short := filepath.Join(dir, "short.nii")
	os.WriteFile(short, b[:len(b)-10], 0o644)
	if _, err := OpenSlabs(short, nil); err == nil || !bytes.Contains([]byte(err.Error()), []byte("short.nii: nifti: header declares")) {
		t.Fatalf("truncated .nii: %v", err)
	}
	// A compressed stream cut short is found when read, sequentially or
	// by spilling.
	gzShort := filepath.Join(dir, "short.nii.gz")
	os.WriteFile(gzShort, gz(b[:len(b)-10]), 0o644)
	for _, whole := range []bool{true, false} {
		r, err := OpenSlabs(gzShort, &SlabOptions{TempDir: dir})
		if err != nil {
			t.Fatal(err)
		}
		z1 := 1
		if whole {
			z1 = im.Dims[2]
		}
		dst := make([]float32, im.Voxels()*2)
		err = r.ReadSlab(dst, 0, z1, nil)
		if !errors.Is(err, io.ErrUnexpectedEOF) {
			t.Fatalf("truncated .nii.gz (whole %v): %v", whole, err)
		}
		r.Close()
	}
	buf.Reset()
	if _, err := OpenSlabs(filepath.Join(dir, "missing.nii"), nil); err == nil {
		t.Fatal("missing file: no error")
	}
}

// TestStreamWriterMatchesWrite writes the same image with Write and in
// parts with Create/Append/Close, plain and compressed, float32 and uint8,
// and compares what Read returns (and, for gzip, the bytes: the deflate
// stream does not depend on how the samples were cut).
func TestStreamWriterMatchesWrite(t *testing.T) {
	dir := t.TempDir()
	im := testImage(1)
	for i := range im.Data {
		im.Data[i] = float32(i % 7)
	}
	for _, name := range []string{"m.nii", "m.nii.gz"} {
		for _, dt := range []Datatype{Float32, Uint8} {
			ref := filepath.Join(dir, "ref-"+name)
			if err := Write(ref, im, &WriteOptions{Datatype: dt, Description: "x"}); err != nil {
				t.Fatal(err)
			}
			p := filepath.Join(dir, name)
			w, err := Create(p, im.Dims, im.Affine, &WriteOptions{Datatype: dt, Description: "x"})
			if err != nil {
				t.Fatal(err)
			}
			for lo := 0; lo < len(im.Data); lo += 13 {
				if err := w.Append(im.Data[lo:min(lo+13, len(im.Data))]); err != nil {
					t.Fatal(err)
				}
			}
			if err := w.Close(); err != nil {
				t.Fatal(err)
			}
			a, _ := os.ReadFile(ref)
			b, _ := os.ReadFile(p)
			if !bytes.Equal(a, b) {
				t.Fatalf("%s %s: stream-written file differs from Write", name, dt)
			}
		}
	}
	// Too few samples: Close fails and leaves no file.
	p := filepath.Join(dir, "few.nii.gz")
	w, err := Create(p, im.Dims, im.Affine, nil)
	if err != nil {
		t.Fatal(err)
	}
	w.Append(im.Data[:5])
	if err := w.Close(); err == nil {
		t.Fatal("short stream: no error")
	}
	// Too many, and a value uint8 cannot hold (index counted across parts).
	w, _ = Create(filepath.Join(dir, "many.nii"), im.Dims, im.Affine, nil)
	if err := w.Append(make([]float32, len(im.Data)+1)); err == nil {
		t.Fatal("too many samples: no error")
	}
	w, _ = Create(filepath.Join(dir, "u8.nii"), im.Dims, im.Affine, &WriteOptions{Datatype: Uint8})
	w.Append([]float32{1, 2})
	if err := w.Append([]float32{3, 300}); err == nil || !bytes.Contains([]byte(err.Error()), []byte("sample 3 (300)")) {
		t.Fatalf("bad uint8 sample: %v", err)
	}
	if _, err := Create(filepath.Join(dir, "x.img"), im.Dims, im.Affine, nil); err == nil {
		t.Fatal("bad name: no error")
	}
	left, _ := filepath.Glob(filepath.Join(dir, ".*.tmp"))
	if len(left) > 0 {
		t.Fatalf("temporary files left: %v", left)
	}
	if _, err := os.Stat(p); !errors.Is(err, os.ErrNotExist) {
		t.Fatal("failed stream left its file")
	}
}
