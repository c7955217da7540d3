package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/internal/cli"
	"github.com/tauvox/tauvox/io/dicom"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/volume"
)

// mapFiles returns the samples of every map in a fit output folder.
func mapFiles(t *testing.T, dir string) map[string][]float32 {
	t.Helper()
	names, err := filepath.Glob(filepath.Join(dir, "*.nii.gz"))
	if err != nil || len(names) == 0 {
		t.Fatalf("%s: no maps (%v)", dir, err)
	}
	out := map[string][]float32{}
	for _, n := range names {
		im, err := nifti.Read(n)
		if err != nil {
			t.Fatal(err)
		}
		out[filepath.Base(n)] = im.Data
	}
	return out
}

func provenanceOf(t *testing.T, dir string) map[string]any {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, "provenance.json"))
	if err != nil {
		t.Fatal(err)
	}
	var p map[string]any
	if err := json.Unmarshal(b, &p); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestFitSlabsIdentical: fitting a NIfTI series slab by slab (a memory
// budget of one slice, several slices, or all) gives the same maps, bit for
// bit, as loading the series whole, for plain and compressed input, any
// worker count, a mask, the Rician noise model with the noise estimated
// from the air, and skipped echoes. No temporary file is left behind.
func TestFitSlabsIdentical(t *testing.T) {
	im := withAir(t)
	gzPath := filepath.Join(t.TempDir(), "t2.nii.gz")
	plain := filepath.Join(t.TempDir(), "t2.nii")
	for _, p := range []string{gzPath, plain} {
		if err := series.Write(p, im, nil); err != nil {
			t.Fatal(err)
		}
	}
	// A mask of the left half.
	mask := filepath.Join(t.TempDir(), "mask.nii.gz")
	mk := *im
	mk.Dims[3], mk.Acq = 1, nil
	mk.Data = make([]float32, im.Voxels())
	for v := range mk.Data {
		if v%48 < 24 {
			mk.Data[v] = 1
		}
	}
	if err := nifti.Write(mask, &mk, nil); err != nil {
		t.Fatal(err)
	}
	// One slice of 48×48 voxels, 16 echoes and 3 outputs is about 230 KiB.
	cases := []slabCase{
		{"nlls", gzPath, nil},
		{"plain", plain, []string{"--method", "loglinear"}},
		{"rician", gzPath, []string{"--noise", "rician"}},
		{"mask", plain, []string{"--mask", mask}},
		{"skip", gzPath, []string{"--skip-echoes", "2", "--threshold", "50"}},
	}
	slabsMatchWhole(t, cases)
	left, _ := filepath.Glob(filepath.Join(os.TempDir(), ".tauvox-*"))
	for _, l := range left {
		if strings.Contains(l, "t2.nii") {
			t.Fatalf("temporary copy left: %s", l)
		}
	}
}

// withAir returns a simulated T2 series of 48×48×4 voxels and 16 echoes
// with a band of air: the phantom fills the field of view, so small
// positive samples stand for air (the threshold and the noise estimate).
func withAir(t *testing.T) *volume.Image {
	t.Helper()
	gz := filepath.Join(t.TempDir(), "sim")
	if code, _, errs := tauvox(t, "simulate", "--kind", "t2", "--out", gz, "--matrix", "48", "--slices", "4"); code != 0 {
		t.Fatal(errs)
	}
	im, _, err := series.Load(filepath.Join(gz, "t2.nii.gz"), nil)
	if err != nil {
		t.Fatal(err)
	}
	nv := im.Voxels()
	for v := 0; v < nv; v++ {
		if v%48 < 8 {
			for k := 0; k < im.Volumes(); k++ {
				im.Data[k*nv+v] = float32(2 + (v*7+k*13)%11)
			}
		}
	}
	return im
}

// slabCase is one fit of TestFitSlabsIdentical: a series and options.
type slabCase struct {
	name string
	in   string
	args []string
}

// slabsMatchWhole fits each case of a 48×48×4 series in memory and then
// slab by slab (--memory 1G: one slab; 250K: one slice a slab, one
// worker; 600K: two slices, three workers) and requires the same maps bit
// for bit, the same threshold, status counts and noise level, and no
// temporary file left behind.
func slabsMatchWhole(t *testing.T, cases []slabCase) {
	t.Helper()
	for _, c := range cases {
		base := append([]string{"fit", c.in, "--model", "t2", "--quiet"}, c.args...)
		refDir := filepath.Join(t.TempDir(), "ref")
		inMemory = true
		code, _, errs := tauvox(t, append(base, "--out", refDir)...)
		inMemory = false
		if code != 0 {
			t.Fatalf("%s in memory: %s", c.name, errs)
		}
		ref := mapFiles(t, refDir)
		refProv := provenanceOf(t, refDir)
		for _, run := range [][]string{{"--memory", "1G"}, {"--memory", "250K", "--workers", "1"}, {"--memory", "600K", "--workers", "3"}} {
			dir := filepath.Join(t.TempDir(), "out")
			code, _, errs := tauvox(t, append(append(base, "--out", dir), run...)...)
			if code != 0 {
				t.Fatalf("%s %v: %s", c.name, run, errs)
			}
			got := mapFiles(t, dir)
			if len(got) != len(ref) {
				t.Fatalf("%s %v: %d maps, want %d", c.name, run, len(got), len(ref))
			}
			for name, want := range ref {
				g := got[name]
				if len(g) != len(want) {
					t.Fatalf("%s %v %s: %d samples, want %d", c.name, run, name, len(g), len(want))
				}
				for v := range want {
					if math.Float32bits(g[v]) != math.Float32bits(want[v]) {
						t.Fatalf("%s %v %s voxel %d: %v, in memory %v", c.name, run, name, v, g[v], want[v])
					}
				}
			}
			p := provenanceOf(t, dir)
			for _, k := range []string{"mask_threshold", "status_counts"} {
				a, _ := json.Marshal(p[k])
				b, _ := json.Marshal(refProv[k])
				if string(a) != string(b) {
					t.Fatalf("%s %v: %s %s, in memory %s", c.name, run, k, a, b)
				}
			}
			if c.name == "rician" {
				s := p["settings"].(map[string]any)["sigma"]
				if s != refProv["settings"].(map[string]any)["sigma"] {
					t.Fatalf("rician: sigma %v, in memory %v", s, refProv["settings"].(map[string]any)["sigma"])
				}
			}
			entries, _ := os.ReadDir(dir)
			var names []string
			for _, e := range entries {
				if e.Name() == ".tauvox-written" {
					continue // the list of what tauvox wrote (for --force), not a temporary file
				}
				names = append(names, e.Name())
				if strings.HasPrefix(e.Name(), ".") {
					t.Fatalf("%s %v: temporary file %s left in the output", c.name, run, e.Name())
				}
			}
			sort.Strings(names)
			if run[1] == "250K" {
				if n := p["settings"].(map[string]any)["slabs"].(float64); n != 4 {
					t.Fatalf("%s: %v slabs at 250K, want 4 (one slice each)", c.name, n)
				}
			}
		}
	}
}

func TestMemoryFlag(t *testing.T) {
	for _, c := range []struct {
		in   string
		want int64
		ok   bool
	}{
		{"1G", 1 << 30, true}, {"512M", 512 << 20, true}, {"2GiB", 2 << 30, true}, {"1.5g", 3 << 29, true},
		{"100000", 100000, true}, {"64KB", 64 << 10, true}, {"0", 0, false}, {"-1G", 0, false}, {"lots", 0, false},
	} {
		var b cli.Bytes
		err := b.Set(c.in)
		if (err == nil) != c.ok || (c.ok && int64(b) != c.want) {
			t.Errorf("--memory %s: %d, %v", c.in, int64(b), err)
		}
	}
	good := simulated(t, "t2")
	code, _, errs := tauvox(t, "fit", good, "--model", "t2", "--out", filepath.Join(t.TempDir(), "x"), "--memory", "lots")
	if code != 2 || !strings.Contains(errs, "memory") {
		t.Fatalf("bad --memory: %d %s", code, errs)
	}
}

// TestFitSlabsIdenticalDICOM: a DICOM series (48×48×4, 16 echoes, classic
// files written by io/dicom) fitted slab by slab gives the maps of the
// whole series in memory, bit for bit, with any memory budget and worker
// count, the Rician noise model and skipped echoes.
func TestFitSlabsIdenticalDICOM(t *testing.T) {
	im := withAir(t)
	dir := filepath.Join(t.TempDir(), "dicom")
	if err := dicom.WriteSeries(dir, im, nil); err != nil {
		t.Fatal(err)
	}
	slabsMatchWhole(t, []slabCase{
		{"dicom nlls", dir, nil},
		{"dicom loglinear", dir, []string{"--method", "loglinear"}},
		{"dicom rician", dir, []string{"--noise", "rician"}},
		{"dicom skip", dir, []string{"--skip-echoes", "2", "--threshold", "50"}},
	})
}
