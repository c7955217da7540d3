package main

import (
	"bytes"
	"encoding/json"
	"image/color"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/io/preview"
)

// TestPreviewCommand: a montage per map; masked voxels black, valid ones
// in the quantity's table (viridis for T2, check-values §5 handling).
func TestPreviewCommand(t *testing.T) {
	series := simulated(t, "t2")
	maps := filepath.Join(t.TempDir(), "maps")
	if code, _, stderr := tauvox(t, "fit", series, "--model", "t2", "--out", maps, "--quiet", "--no-preview"); code != 0 {
		t.Fatal(stderr)
	}
	code, stdout, stderr := tauvox(t, "preview", maps, "--range", "0,2000")
	if code != 0 || !strings.Contains(stdout, "wrote 4 previews") {
		t.Fatalf("%d %s %s", code, stdout, stderr)
	}
	f, err := os.Open(filepath.Join(maps, "T2map.png"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	var black, table int
	inTable := map[color.RGBA]bool{}
	for _, c := range preview.Viridis.Colors {
		inTable[c] = true
	}
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bb, _ := img.At(x, y).RGBA()
			c := color.RGBA{uint8(r >> 8), uint8(g >> 8), uint8(bb >> 8), 255}
			if c == preview.Black {
				black++
			} else if inTable[c] {
				table++
			}
		}
	}
	if black == 0 || table == 0 {
		t.Errorf("black %d, viridis %d pixels", black, table)
	}
	// The previews in the maps folder are tauvox's own: replaced. In
	// another folder an existing PNG needs --force.
	if code, _, stderr := tauvox(t, "preview", maps); code != 0 {
		t.Errorf("redraw in the maps folder: %d %s", code, stderr)
	}
	other := t.TempDir()
	os.WriteFile(filepath.Join(other, "T2map.png"), []byte("mine"), 0o644)
	if code, _, stderr := tauvox(t, "preview", maps, "--out", other); code != 2 || !strings.Contains(stderr, "exists") {
		t.Errorf("existing PNG elsewhere: %d %s", code, stderr)
	}
	if code, _, stderr := tauvox(t, "preview", maps, "--range", "9,1", "--force"); code != 2 || !strings.Contains(stderr, "LO must be below HI") {
		t.Errorf("bad range: %d %s", code, stderr)
	}
}

// TestFitPreviewsFromMemory: the previews a one-slab fit draws from the
// maps it holds equal, byte for byte, those drawn from the written files
// by a fit in many slabs (--memory) and by tauvox preview.
func TestFitPreviewsFromMemory(t *testing.T) {
	series := simulated(t, "t2")
	root := t.TempDir()
	one, many := filepath.Join(root, "one"), filepath.Join(root, "many")
	if code, _, stderr := tauvox(t, "fit", series, "--model", "t2", "--out", one, "--quiet"); code != 0 {
		t.Fatal(stderr)
	}
	if code, _, stderr := tauvox(t, "fit", series, "--model", "t2", "--out", many, "--quiet", "--memory", "64K"); code != 0 {
		t.Fatal(stderr)
	}
	again := filepath.Join(root, "again")
	if code, _, stderr := tauvox(t, "preview", one, "--out", again, "--maps", "T2map,M0map"); code != 0 {
		t.Fatal(stderr)
	}
	var slabs struct {
		Settings struct {
			Slabs int `json:"slabs"`
		} `json:"settings"`
	}
	b, _ := os.ReadFile(filepath.Join(many, "provenance.json"))
	if json.Unmarshal(b, &slabs); slabs.Settings.Slabs < 2 {
		t.Fatalf("--memory 64K fitted %d slabs, want several", slabs.Settings.Slabs)
	}
	for _, stem := range []string{"T2map", "M0map"} {
		a, err := os.ReadFile(filepath.Join(one, stem+".png"))
		if err != nil {
			t.Fatal(err)
		}
		for _, other := range []string{many, again} {
			if b, err := os.ReadFile(filepath.Join(other, stem+".png")); err != nil || !bytes.Equal(a, b) {
				t.Errorf("%s: %s differs from the one-slab fit's (%v)", stem, other, err)
			}
		}
	}
}

// TestPreviewWindowPerQuantity (issue 17): --range T2=0,300 windows the T2
// map only; M0 and R2 keep their automatic windows (their PNGs equal those
// drawn without --range), and a bare --range LO,HI windows the maps in ms
// only.
func TestPreviewWindowPerQuantity(t *testing.T) {
	series := simulated(t, "t2")
	maps := filepath.Join(t.TempDir(), "maps")
	if code, _, stderr := tauvox(t, "fit", series, "--model", "t2", "--out", maps, "--quiet"); code != 0 {
		t.Fatal(stderr)
	}
	read := func(dir string) map[string][]byte {
		out := map[string][]byte{}
		for _, s := range []string{"T2map", "R2map", "M0map"} {
			b, err := os.ReadFile(filepath.Join(dir, s+".png"))
			if err != nil {
				t.Fatal(err)
			}
			out[s] = b
		}
		return out
	}
	auto := read(maps)
	for _, r := range []string{"T2=0,300", "0,300", "t2=0:300"} {
		if code, _, stderr := tauvox(t, "preview", maps, "--range", r, "--quiet"); code != 0 {
			t.Fatalf("--range %s: %d %s", r, code, stderr)
		}
		got := read(maps)
		if bytes.Equal(got["T2map"], auto["T2map"]) {
			t.Errorf("--range %s: T2map.png unchanged", r)
		}
		for _, s := range []string{"R2map", "M0map"} {
			if !bytes.Equal(got[s], auto[s]) {
				t.Errorf("--range %s: %s.png changed; only T2 has a window", r, s)
			}
		}
	}
	if code, _, stderr := tauvox(t, "preview", maps, "--range", "M0=0,2000", "--range", "T2=0,300", "--quiet"); code != 0 {
		t.Fatalf("two windows: %d %s", code, stderr)
	}
	if got := read(maps); bytes.Equal(got["M0map"], auto["M0map"]) || !bytes.Equal(got["R2map"], auto["R2map"]) {
		t.Error("M0=0,2000: M0map.png unchanged or R2map.png changed")
	}
	if code, _, stderr := tauvox(t, "preview", maps, "--range", "=0,300"); code != 2 || !strings.Contains(stderr, "QUANTITY=LO,HI") {
		t.Errorf("empty quantity: %d %s", code, stderr)
	}
}
