package main

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/io/dicom"
	"github.com/tauvox/tauvox/io/nifti"
)

// TestExportDICOM: simulate DICOM → fit → export --like; the exported T2
// map reads back (io/dicom) with the fitted values in ms at the same world
// positions, in the source's study, with no patient identifier.
func TestExportDICOM(t *testing.T) {
	sim := filepath.Join(t.TempDir(), "sim")
	if code, _, stderr := tauvox(t, "simulate", "--kind", "t2", "--format", "dicom", "--tilt", "12", "--out", sim, "--matrix", "24", "--slices", "2"); code != 0 {
		t.Fatal(stderr)
	}
	maps := filepath.Join(t.TempDir(), "maps")
	if code, _, stderr := tauvox(t, "fit", filepath.Join(sim, "t2"), "--model", "t2", "--out", maps, "--quiet"); code != 0 {
		t.Fatal(stderr)
	}
	out := filepath.Join(t.TempDir(), "dcm")
	code, stdout, stderr := tauvox(t, "export", maps, "--dicom", out, "--like", filepath.Join(sim, "t2"))
	if code != 0 || !strings.Contains(stdout, "wrote 4 parametric maps") {
		t.Fatalf("%d %s %s", code, stdout, stderr)
	}
	src, err := dicom.Scan([]string{filepath.Join(sim, "t2")}, &dicom.ScanOptions{KeepIdentifiers: true})
	if err != nil {
		t.Fatal(err)
	}
	c, err := dicom.Scan([]string{filepath.Join(out, "T2map.dcm")}, &dicom.ScanOptions{Derived: true, KeepIdentifiers: true})
	if err != nil || len(c.Series) != 1 {
		t.Fatal(err)
	}
	s := c.Series[0]
	if s.StudyUID != src.Series[0].StudyUID || s.SOPClass != "1.2.840.10008.5.1.4.1.1.30" {
		t.Errorf("study %s (source %s), class %s", s.StudyUID, src.Series[0].StudyUID, s.SOPClass)
	}
	if s.Identifiers.PatientName != "" || src.Series[0].Identifiers.PatientName == "" {
		t.Errorf("patient name %q (source %q)", s.Identifiers.PatientName, src.Series[0].Identifiers.PatientName)
	}
	got, err := dicom.LoadSeries(s)
	if err != nil {
		t.Fatal(err)
	}
	want, err := nifti.Read(filepath.Join(maps, "T2map.nii.gz"))
	if err != nil {
		t.Fatal(err)
	}
	inv, _ := want.Affine.Inverse()
	n := 0
	for k := 0; k < got.Dims[2]; k++ {
		for j := 0; j < got.Dims[1]; j++ {
			for i := 0; i < got.Dims[0]; i++ {
				x, y, z := got.Affine.Apply(float64(i), float64(j), float64(k))
				a, b, cc := inv.Apply(x, y, z)
				ia, ib, ic := int(math.Round(a)), int(math.Round(b)), int(math.Round(cc))
				if math.Abs(a-float64(ia))+math.Abs(b-float64(ib))+math.Abs(cc-float64(ic)) > 1e-3 {
					t.Fatalf("voxel (%d,%d,%d) lies at (%g,%g,%g) of the NIfTI grid", i, j, k, a, b, cc)
				}
				g, w := got.Data[got.Index(i, j, k, 0)], want.Data[want.Index(ia, ib, ic, 0)]
				if math.Float32bits(g) != math.Float32bits(w) && !(math.IsNaN(float64(g)) && math.IsNaN(float64(w))) {
					t.Fatalf("voxel (%d,%d,%d): %v ms, NIfTI %v ms", i, j, k, g, w)
				}
				if !math.IsNaN(float64(g)) {
					n++
				}
			}
		}
	}
	if n == 0 {
		t.Error("no finite voxel")
	}
	// --keep-identifiers copies the source's patient name; the folder
	// exists now, so --force is needed.
	if code, _, stderr := tauvox(t, "export", maps, "--dicom", out, "--like", filepath.Join(sim, "t2"), "--keep-identifiers", "--maps", "T2map", "--quiet"); code != 2 || !strings.Contains(stderr, "exists") {
		t.Errorf("existing folder: %d %s", code, stderr)
	}
	if code, _, stderr := tauvox(t, "export", maps, "--dicom", out, "--like", filepath.Join(sim, "t2"), "--keep-identifiers", "--maps", "T2map", "--force", "--quiet"); code != 0 {
		t.Fatal(stderr)
	}
	var files []string // the DICOM files; .tauvox-written lists them for --force
	ents, _ := os.ReadDir(out)
	for _, e := range ents {
		if e.Name() != ".tauvox-written" {
			files = append(files, e.Name())
		}
	}
	c, err = dicom.Scan([]string{out}, &dicom.ScanOptions{Derived: true, KeepIdentifiers: true})
	if err != nil || len(files) != 1 || len(c.Series) != 1 || c.Series[0].Identifiers.PatientName != src.Series[0].Identifiers.PatientName {
		t.Errorf("keep identifiers: %d files, %v", len(files), err)
	}
}

func TestExportUsage(t *testing.T) {
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"export", "x"}, "--dicom is required"},
		{[]string{"export", "--dicom", "y"}, "give exactly one MAPS_DIR"},
		{[]string{"export", "x", "--dicom", "y", "--keep-identifiers"}, "--keep-identifiers needs --like"},
		{[]string{"export", filepath.Join(t.TempDir(), "none"), "--dicom", "y"}, "no such file"},
	}
	for _, c := range cases {
		if code, _, stderr := tauvox(t, c.args...); code != 2 || !strings.Contains(stderr, c.want) {
			t.Errorf("%v: %d %q, want %q", c.args, code, stderr, c.want)
		}
	}
}
