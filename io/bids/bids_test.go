package bids

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// The dataset of testdata/bids is made by testdata/gen/bids_dataset.py
// (numpy + nibabel); its values are invented, only its layout matters here.
var root = filepath.Join("..", "..", "testdata", "bids")

// relax collects the qMRI file collections of tauvox's default models
// (BIDS qMRI appendix: MESE, MEGRE, IRT1, VFA).
var relax = &ScanOptions{Suffixes: []string{"MESE", "MEGRE", "IRT1", "VFA"}}

func TestParseName(t *testing.T) {
	cases := []struct {
		in, want, err string
	}{
		{"sub-01_ses-1_echo-2_MESE.nii.gz", "sub-01_ses-1_echo-2_MESE.nii.gz", ""},
		{"MESE.json", "MESE.json", ""},
		{"sub-01_ses-1_MESE", "sub-01_ses-1_MESE", ""},
		{"sub-01_sub-02_MESE.nii", "", "given twice"},
		{"sub-01_echo_MESE.nii", "", "not a key-label"},
		{"sub-0.1_MESE.nii", "", "suffix"}, // the '.' starts the extension
		{"sub-01_ME-SE.nii", "", "suffix"},
	}
	for _, c := range cases {
		n, err := ParseName(c.in)
		if c.err != "" {
			if err == nil || !strings.Contains(err.Error(), c.err) {
				t.Errorf("%s: error %v, want %q", c.in, err, c.err)
			}
			continue
		}
		if err != nil || n.String() != c.want {
			t.Errorf("%s: %q %v", c.in, n.String(), err)
		}
	}
}

// TestDerivativeName: the naming rule documented in docs/formats.md.
func TestDerivativeName(t *testing.T) {
	base, _ := ParseName("sub-01_ses-1_acq-fast_run-2_MESE")
	base = base.Without()
	cases := []struct{ stem, want string }{
		{"T2map", "sub-01_ses-1_acq-fast_run-2_desc-MESE_T2map.nii.gz"},
		{"T2map_sd", "sub-01_ses-1_acq-fast_run-2_desc-MESEsd_T2map.nii.gz"},
		{"R2map", "sub-01_ses-1_acq-fast_run-2_desc-MESE_R2map.nii.gz"},
		{"M0map", "sub-01_ses-1_acq-fast_run-2_desc-MESE_M0map.nii.gz"},
		{"M0map_sd", "sub-01_ses-1_acq-fast_run-2_desc-MESEsd_M0map.nii.gz"},
		{"status", "sub-01_ses-1_acq-fast_run-2_desc-MESE_status.nii.gz"},
		{"fitquality", "sub-01_ses-1_acq-fast_run-2_desc-MESE_fitquality.nii.gz"},
	}
	for _, c := range cases {
		if got := DerivativeName(base, "MESE", c.stem, ".nii.gz"); got != c.want {
			t.Errorf("%s: %s, want %s", c.stem, got, c.want)
		}
	}
	// desc- goes after run- and before nothing else of the table.
	n, _ := ParseName("sub-01_run-1_echo-1_MESE.nii.gz")
	if got := n.With("desc", "x").String(); got != "sub-01_run-1_echo-1_desc-x_MESE.nii.gz" {
		t.Errorf("With: %s", got)
	}
}

func TestScanDataset(t *testing.T) {
	ds, err := Scan(root, relax)
	if err != nil {
		t.Fatal(err)
	}
	var ids []string
	for _, c := range ds.Collections {
		ids = append(ids, c.ID()+":"+c.Suffix)
	}
	want := "sub-01/ses-1/anat/sub-01_ses-1_IRT1:IRT1 sub-01/ses-1/anat/sub-01_ses-1_MESE:MESE sub-02/ses-1/anat/sub-02_ses-1_MESE:MESE"
	if got := strings.Join(ids, " "); got != want {
		t.Fatalf("collections %s\nwant %s", got, want)
	}
	if len(ds.Notes) != 1 || !strings.Contains(ds.Notes[0], "part-phase left out") {
		t.Errorf("notes %q", ds.Notes)
	}
	// sub-02 inherits RepetitionTime and the field from the session-level
	// sidecar; EchoTime comes from each echo's own (check-values §3.6:
	// the index is not the value).
	im, inputs, err := ds.Collections[2].Load()
	if err != nil {
		t.Fatal(err)
	}
	if im.Dims != [4]int{16, 16, 2, 6} {
		t.Fatalf("dims %v", im.Dims)
	}
	for e, a := range im.Acq {
		if math.Abs(a.EchoTime-10*float64(e+1)) > 1e-9 || a.RepetitionTime != 3000 {
			t.Errorf("volume %d: TE %v TR %v", e, a.EchoTime, a.RepetitionTime)
		}
	}
	if im.Source.FieldStrength != 1.5 {
		t.Errorf("field %v", im.Source.FieldStrength)
	}
	if len(inputs) != 13 || inputs[1].Role != "sidecar" || filepath.Base(inputs[1].Path) != "sub-02_ses-1_MESE.json" {
		t.Errorf("inputs %v", inputs)
	}
	// IRT1: four part-mag inversions in TI order.
	ir, _, err := ds.Collections[0].Load()
	if err != nil {
		t.Fatal(err)
	}
	for i, ti := range []float64{100, 400, 1000, 2400} {
		if math.Abs(ir.Acq[i].InversionTime-ti) > 1e-9 {
			t.Errorf("inv-%d: TI %v, want %v", i+1, ir.Acq[i].InversionTime, ti)
		}
	}

	one, err := Scan(root, &ScanOptions{Suffixes: relax.Suffixes, Participants: []string{"sub-02"}})
	if err != nil || len(one.Collections) != 1 || one.Collections[0].Subject != "02" {
		t.Errorf("participant filter: %v %v", one, err)
	}
	if _, err := Scan(root, &ScanOptions{Suffixes: relax.Suffixes, Participants: []string{"07"}}); err == nil || !strings.Contains(err.Error(), "sub-07 not found") {
		t.Errorf("missing participant: %v", err)
	}
}

// TestBroken: each broken dataset gives an error naming the file and the
// problem.
func TestBroken(t *testing.T) {
	copyFile := func(t *testing.T, src, dst string) {
		b, err := os.ReadFile(src)
		if err != nil {
			t.Fatal(err)
		}
		os.MkdirAll(filepath.Dir(dst), 0o755)
		if err := os.WriteFile(dst, b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	anat := filepath.Join(root, "sub-01", "ses-1", "anat")
	cases := []struct {
		name  string
		setup func(t *testing.T, dir string)
		err   string
	}{
		{"no description", func(t *testing.T, dir string) {}, "not a BIDS dataset"},
		{"index twice", func(t *testing.T, dir string) {
			d := filepath.Join(dir, "sub-01", "anat")
			copyFile(t, filepath.Join(anat, "sub-01_ses-1_echo-1_MESE.nii.gz"), filepath.Join(d, "sub-01_echo-1_MESE.nii.gz"))
			copyFile(t, filepath.Join(anat, "sub-01_ses-1_echo-1_MESE.nii.gz"), filepath.Join(d, "sub-01_echo-01_MESE.nii.gz"))
		}, "index 1 given by both"},
		{"bad index", func(t *testing.T, dir string) {
			copyFile(t, filepath.Join(anat, "sub-01_ses-1_echo-1_MESE.nii.gz"), filepath.Join(dir, "sub-01", "anat", "sub-01_echo-a_MESE.nii.gz"))
		}, "echo-a is not a non-negative integer index"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			if c.name != "no description" {
				copyFile(t, filepath.Join(root, "dataset_description.json"), filepath.Join(dir, "dataset_description.json"))
			}
			c.setup(t, dir)
			_, err := Scan(dir, relax)
			if err == nil || !strings.Contains(err.Error(), c.err) || !strings.Contains(err.Error(), dir) && !strings.Contains(err.Error(), "sub-01") {
				t.Errorf("error %v, want %q", err, c.err)
			}
		})
	}
	// A collection whose echo lacks a sidecar fails at Load, naming it.
	dir := t.TempDir()
	copyFile(t, filepath.Join(root, "dataset_description.json"), filepath.Join(dir, "dataset_description.json"))
	for e := 1; e <= 2; e++ {
		n := "sub-01_ses-1_echo-" + string(rune('0'+e)) + "_MESE"
		copyFile(t, filepath.Join(anat, n+".nii.gz"), filepath.Join(dir, "sub-01", "anat", "sub-01_echo-"+string(rune('0'+e))+"_MESE.nii.gz"))
	}
	copyFile(t, filepath.Join(anat, "sub-01_ses-1_echo-1_MESE.json"), filepath.Join(dir, "sub-01", "anat", "sub-01_echo-1_MESE.json"))
	ds, err := Scan(dir, relax)
	if err != nil {
		t.Fatal(err)
	}
	if _, _, err := ds.Collections[0].Load(); err == nil || !strings.Contains(err.Error(), "sub-01_echo-2_MESE.nii.gz: no sidecar") {
		t.Errorf("missing sidecar: %v", err)
	}
}
