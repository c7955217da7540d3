package main

import (
	"bytes"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/io/nifti"
)

// protocolRefs reads testdata/dicom/protocols-refs.json, written by
// testdata/gen/dicom_protocols.py (pydicom 2.3.1; affines from nibabel
// 5.0.0 nicom.dicomwrappers; T1 is the value the signals were made from).
func protocolRefs(t *testing.T) (t1 [][][]float64, affines map[string][][4]float64) {
	t.Helper()
	b, err := os.ReadFile("../../testdata/dicom/protocols-refs.json")
	if err != nil {
		t.Fatal(err)
	}
	var r struct {
		Protocols struct {
			IR, VFA struct {
				Affine [][4]float64 `json:"affine"`
			}
			T1 [][][]float64 `json:"t1"`
		} `json:"protocols"`
	}
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	return r.Protocols.T1, map[string][][4]float64{"t1-ir": r.Protocols.IR.Affine, "t1-vfa": r.Protocols.VFA.Affine}
}

// TestFitSplitProtocol: one folder holds inversion recovery as 7 series
// (one per TI), variable flip angle as 6 series (one per flip angle), a
// localizer and an unrelated series. scan lists the two protocols;
// `fit FOLDER --model t1-ir` and `--model t1-vfa` each pick theirs and
// give T1 within 3 % of the value the signals were made from in every
// voxel, on nibabel's grid (affine to 1e-3 mm: the NIfTI header holds
// float32).
func TestFitSplitProtocol(t *testing.T) {
	dir := "../../testdata/dicom/protocols"
	truth, affines := protocolRefs(t)
	code, stdout, stderr := tauvox(t, "scan", dir, "--json")
	if code != 0 {
		t.Fatal(stderr)
	}
	var res pipeline.ScanResult
	if err := json.Unmarshal([]byte(stdout), &res); err != nil {
		t.Fatal(err)
	}
	models := map[string][]string{}
	for _, s := range res.Series {
		if len(s.Joins) > 0 {
			models[s.Model] = s.Joins
		}
	}
	if len(models["t1-ir"]) != 7 || len(models["t1-vfa"]) != 6 || len(models) != 2 {
		t.Fatalf("protocol rows: %v", models)
	}
	_, text, _ := tauvox(t, "scan", dir)
	if !strings.Contains(text, "joins 7 series") || !strings.Contains(text, "TI 300 ms") {
		t.Errorf("scan text lacks the protocol rows or the fixed TI:\n%s", text)
	}
	for _, model := range []string{"t1-ir", "t1-vfa"} {
		out := filepath.Join(t.TempDir(), model)
		if code, _, stderr := tauvox(t, "fit", dir, "--model", model, "--no-mask", "--out", out, "--no-preview"); code != 0 {
			t.Fatalf("%s: %s", model, stderr)
		}
		m, err := nifti.Read(filepath.Join(out, "T1map.nii.gz"))
		if err != nil {
			t.Fatal(err)
		}
		if m.Dims != [4]int{8, 8, 3, 1} {
			t.Fatalf("%s: dims %v", model, m.Dims)
		}
		worst := 0.0
		for k := 0; k < 3; k++ {
			for j := 0; j < 8; j++ {
				for i := 0; i < 8; i++ {
					got := float64(m.Data[m.Index(i, j, k, 0)])
					want := truth[k][j][i]
					rel := math.Abs(got-want) / want
					if !(rel <= 0.03) {
						t.Errorf("%s voxel %d,%d,%d: T1 %.1f ms, truth %.1f ms", model, i, j, k, got, want)
					}
					worst = math.Max(worst, rel)
				}
			}
		}
		t.Logf("%s: worst relative T1 error %.2e over 192 voxels", model, worst)
		for r := 0; r < 3; r++ {
			for c := 0; c < 4; c++ {
				if d := math.Abs(m.Affine[r][c] - affines[model][r][c]); d > 1e-3 {
					t.Errorf("%s affine[%d][%d] = %.6g, nibabel %.6g", model, r, c, m.Affine[r][c], affines[model][r][c])
				}
			}
		}
	}
}

// TestSplitProtocolRefused: a protocol with a repeated TI and two series
// of different matrix joined with --series end with exit code 2, one
// line naming the folder and the problem, and no output folder.
func TestSplitProtocolRefused(t *testing.T) {
	for _, tc := range []struct {
		name string
		args []string
		want []string
	}{
		{"repeated TI", []string{"../../testdata/dicom/geometry/repeat-ti", "--model", "t1-ir"},
			[]string{"geometry/repeat-ti", "InversionTime 300 ms is repeated: series 42-"}},
		{"other matrix", []string{"../../testdata/dicom/protocols-mismatch", "--model", "t1-ir", "--series", "21,22"},
			[]string{"protocols-mismatch", "matrix 8×6 (Columns×Rows) differs from 8×8"}},
		{"TR differs (found by scan)", []string{"../../testdata/dicom/protocols-mismatch", "--model", "t1-ir"},
			[]string{"protocols-mismatch", "differ in InversionTime and also in RepetitionTime"}},
		{"TR differs", []string{"../../testdata/dicom/protocols-mismatch", "--model", "t1-ir", "--series", "21,23"},
			[]string{"protocols-mismatch", "also in RepetitionTime, which must agree: 6000 ms in 21-"}},
	} {
		out := filepath.Join(t.TempDir(), "out")
		code, _, stderr := tauvox(t, append(append([]string{"fit"}, tc.args...), "--out", out)...)
		line := strings.TrimSpace(stderr)
		if code != 2 || strings.Count(line, "\n") != 0 {
			t.Errorf("%s: exit %d, stderr %q", tc.name, code, stderr)
		}
		for _, w := range tc.want {
			if !strings.Contains(line, w) {
				t.Errorf("%s: %q lacks %q", tc.name, line, w)
			}
		}
		if _, err := os.Stat(out); !os.IsNotExist(err) {
			t.Errorf("%s: %s was written", tc.name, out)
		}
	}
}

// TestFitDerived: the inversion recovery protocol marked DERIVED
// (ImageType DERIVED\SECONDARY\M\ND, PS3.3 C.7.6.1.1.2) is left out by
// fit, and fitted with --derived, to the same map, with a warning in
// provenance.json.
func TestFitDerived(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "derived")
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	files, _ := filepath.Glob("../../testdata/dicom/codecs/ir-rle/*")
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		nb := bytes.Replace(b, []byte(`ORIGINAL\PRIMARY\M\ND `), []byte(`DERIVED\SECONDARY\M\ND`), 1)
		if bytes.Equal(nb, b) {
			t.Fatalf("%s: ImageType not found", f)
		}
		if err := os.WriteFile(filepath.Join(dir, filepath.Base(f)), nb, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	out := filepath.Join(t.TempDir(), "fit")
	if code, _, stderr := tauvox(t, "fit", dir, "--model", "t1-ir", "--out", out); code != 2 || !strings.Contains(stderr, "--derived reads derived images") {
		t.Errorf("without --derived: exit %d, %q", code, stderr)
	}
	if code, _, stderr := tauvox(t, "fit", dir, "--model", "t1-ir", "--derived", "--no-mask", "--no-preview", "--workers", "2", "--out", out); code != 0 {
		t.Fatal(stderr)
	}
	b, err := os.ReadFile(filepath.Join(out, "provenance.json"))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(b), `the images are DERIVED (ImageType DERIVED\\SECONDARY\\M\\ND)`) {
		t.Errorf("provenance lacks the derived warning:\n%s", b)
	}
}

// TestScanEchoProtocol: scan suggests t2 for a spin-echo train split over
// series (the model registry's suggestion for EchoTime and SE).
func TestScanEchoProtocol(t *testing.T) {
	code, stdout, stderr := tauvox(t, "scan", "../../testdata/dicom/geometry/echo-split", "--json")
	if code != 0 {
		t.Fatal(stderr)
	}
	var res pipeline.ScanResult
	if err := json.Unmarshal([]byte(stdout), &res); err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, s := range res.Series {
		if len(s.Joins) > 0 {
			n++
			if s.Model != "t2" || len(s.Joins) != 4 {
				t.Errorf("protocol row %+v", s)
			}
		}
	}
	if n != 1 {
		t.Errorf("%d protocol rows", n)
	}
}
