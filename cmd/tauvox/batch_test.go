package main

import (
	"encoding/json"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/nifti"
)

// bidsRoot is the dataset made by testdata/gen/bids_dataset.py (numpy +
// nibabel; invented values): 2 subjects × MESE 6 echoes, 16×16×2, and one
// IRT1 with 4 inversions.
var bidsRoot = filepath.Join("..", "..", "testdata", "bids")

// copyTree copies the dataset so that a test may change it.
func copyTree(t *testing.T, src string) string {
	t.Helper()
	dst := filepath.Join(t.TempDir(), "raw")
	err := filepath.WalkDir(src, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		r, _ := filepath.Rel(src, p)
		if d.IsDir() {
			return os.MkdirAll(filepath.Join(dst, r), 0o755)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(filepath.Join(dst, r), b, 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
	return dst
}

func listTree(t *testing.T, dir string) []string {
	t.Helper()
	var out []string
	filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() {
			r, _ := filepath.Rel(dir, p)
			out = append(out, filepath.ToSlash(r))
		}
		return nil
	})
	sort.Strings(out)
	return out
}

func TestBatch(t *testing.T) {
	out := filepath.Join(t.TempDir(), "deriv")
	code, stdout, stderr := tauvox(t, "batch", bidsRoot, "--out", out, "--jobs", "2", "--workers", "2")
	if code != 0 {
		t.Fatalf("batch: %d\n%s\n%s", code, stdout, stderr)
	}
	if !strings.Contains(stdout, "3 fitted, 0 up to date, 0 failed") || !strings.Contains(stderr, "part-phase left out") {
		t.Errorf("stdout %s\nstderr %s", stdout, stderr)
	}
	files := listTree(t, out)
	have := map[string]bool{}
	for _, f := range files {
		have[f] = true
		if strings.Contains(f, ".tauvox") || strings.Contains(f, ".tmp") {
			t.Errorf("work file left behind: %s", f)
		}
	}
	// Every name (bids.DerivativeName, docs/formats.md): each output of one
	// input carries desc-<SUFFIX>; a standard error appends sd to the label.
	a1 := "sub-01/ses-1/anat/sub-01_ses-1_"
	want := []string{"dataset_description.json"}
	for _, job := range []struct{ prefix, suffix, model string }{
		{a1, "MESE", "t2"}, {a1, "IRT1", "t1-ir"}, {"sub-02/ses-1/anat/sub-02_ses-1_", "MESE", "t2"},
	} {
		m, err := fit.New(fit.Spec{Model: job.model})
		if err != nil {
			t.Fatal(err)
		}
		d := job.prefix + "desc-" + job.suffix
		for _, o := range m.Outputs() {
			for _, ext := range []string{".nii.gz", ".json"} {
				want = append(want, d+"_"+o.Map+ext, d+"sd_"+o.Map+ext)
			}
		}
		for _, stem := range []string{"fitquality", "status"} {
			want = append(want, d+"_"+stem+".nii.gz", d+"_"+stem+".json")
		}
		want = append(want, d+"_provenance.json")
	}
	sort.Strings(want)
	if strings.Join(files, "\n") != strings.Join(want, "\n") {
		t.Errorf("derivative names:\n%s\nwant:\n%s", strings.Join(files, "\n"), strings.Join(want, "\n"))
	}

	var desc map[string]any
	b, _ := os.ReadFile(filepath.Join(out, "dataset_description.json"))
	if err := json.Unmarshal(b, &desc); err != nil || desc["DatasetType"] != "derivative" {
		t.Errorf("dataset_description.json: %s", b)
	}
	if g := desc["GeneratedBy"].([]any)[0].(map[string]any); g["Name"] != "tauvox" || g["Version"] != version() {
		t.Errorf("GeneratedBy %v", g)
	}
	var side map[string]any
	b, _ = os.ReadFile(filepath.Join(out, a1+"desc-MESE_T2map.json"))
	if err := json.Unmarshal(b, &side); err != nil {
		t.Fatal(err)
	}
	// BIDS recommended keys of a qMRI map sidecar (check-values §3.6).
	for _, k := range []string{"Sources", "EstimationReference", "EstimationAlgorithm", "Units", "EchoTime", "RepetitionTime"} {
		if _, ok := side[k]; !ok {
			t.Errorf("T2map.json lacks %s", k)
		}
	}
	if src := side["Sources"].([]any); src[0] != "bids:raw:sub-01/ses-1/anat/sub-01_ses-1_echo-1_MESE.nii.gz" {
		t.Errorf("Sources %v", src)
	}
	if te := side["EchoTime"].([]any); len(te) != 6 || te[5].(float64) != 0.06 {
		t.Errorf("EchoTime %v", te)
	}

	// The truth of the generator: T2 = 40 + 80·i/15 ms inside the disc;
	// noise SD 2 on M0 1000, so within 3 %.
	m, err := nifti.Read(filepath.Join(out, "sub-02/ses-1/anat/sub-02_ses-1_desc-MESE_T2map.nii.gz"))
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for k := 0; k < 2; k++ {
		for j := 0; j < 16; j++ {
			for i := 0; i < 16; i++ {
				v := float64(m.Data[m.Index(i, j, k, 0)])
				in := (float64(i)-7.5)*(float64(i)-7.5)+(float64(j)-7.5)*(float64(j)-7.5) <= 30
				if !in {
					continue
				}
				n++
				if truth := 40 + 80*float64(i)/15; math.IsNaN(v) || math.Abs(v-truth) > 0.03*truth {
					t.Errorf("T2(%d,%d,%d) = %v, truth %v", i, j, k, v, truth)
				}
			}
		}
	}
	if n < 150 {
		t.Errorf("only %d voxels checked", n)
	}

	// A re-run skips every finished series.
	code, stdout, stderr = tauvox(t, "batch", bidsRoot, "--out", out)
	if code != 0 || !strings.Contains(stdout, "0 fitted, 3 up to date, 0 failed") || strings.Count(stdout, "skipped") != 3 {
		t.Errorf("re-run: %d\n%s\n%s", code, stdout, stderr)
	}
}

// TestBatchResume: a changed input or setting refits only the series
// concerned; --participant-label selects; the maps do not depend on
// --jobs and --workers.
func TestBatchResume(t *testing.T) {
	raw := copyTree(t, bidsRoot)
	out := filepath.Join(t.TempDir(), "deriv")
	if code, _, stderr := tauvox(t, "batch", raw, "--out", out, "--participant-label", "02", "--jobs", "1", "--workers", "1"); code != 0 {
		t.Fatal(stderr)
	}
	if files := listTree(t, out); len(files) != 2*8+1+1 || !strings.HasPrefix(files[1], "sub-02/") {
		t.Fatalf("participant 02 only: %v", files)
	}
	t2 := filepath.Join(out, "sub-02/ses-1/anat/sub-02_ses-1_desc-MESE_T2map.nii.gz")
	first, err := nifti.Read(t2)
	if err != nil {
		t.Fatal(err)
	}
	// Both participants, two jobs on two workers: sub-02 is up to date.
	code, stdout, stderr := tauvox(t, "batch", raw, "--out", out, "--participant-label", "sub-01,sub-02", "--jobs", "2", "--workers", "2")
	if code != 0 || !strings.Contains(stdout, "2 fitted, 1 up to date") {
		t.Fatalf("%d\n%s\n%s", code, stdout, stderr)
	}
	// An inherited sidecar changes: sub-02 is fitted again (provenance
	// checksums differ), with 2 workers now; the maps are identical.
	sc := filepath.Join(raw, "sub-02/ses-1/sub-02_ses-1_MESE.json")
	b, _ := os.ReadFile(sc)
	if err := os.WriteFile(sc, append(b, ' '), 0o644); err != nil {
		t.Fatal(err)
	}
	code, stdout, stderr = tauvox(t, "batch", raw, "--out", out, "--workers", "2", "--jobs", "1")
	if code != 0 || !strings.Contains(stdout, "1 fitted, 2 up to date") || !strings.Contains(stdout, "sub-02_ses-1_MESE: t2/nlls") {
		t.Fatalf("%d\n%s\n%s", code, stdout, stderr)
	}
	again, err := nifti.Read(t2)
	if err != nil {
		t.Fatal(err)
	}
	for i := range first.Data {
		if math.Float32bits(first.Data[i]) != math.Float32bits(again.Data[i]) {
			t.Fatalf("voxel %d: %v with 1 worker, %v with 2", i, first.Data[i], again.Data[i])
		}
	}
	// Another model for a suffix is another setting: refit.
	code, stdout, _ = tauvox(t, "batch", raw, "--out", out, "--model", "MESE=t2-epg", "--model", "IRT1=skip", "--dry-run")
	if code != 0 || strings.Count(stdout, "fit (settings changed)") != 2 || strings.Contains(stdout, "IRT1") {
		t.Errorf("dry run:\n%s", stdout)
	}
	// A damaged echo fails its series only: exit 1, the others skipped.
	os.WriteFile(filepath.Join(raw, "sub-01/ses-1/anat/sub-01_ses-1_echo-3_MESE.nii.gz"), []byte("not nifti"), 0o644)
	code, stdout, stderr = tauvox(t, "batch", raw, "--out", out)
	if code != 1 || !strings.Contains(stderr, "sub-01_ses-1_echo-3_MESE.nii.gz") || !strings.Contains(stdout, "0 fitted, 2 up to date, 1 failed") {
		t.Errorf("damaged: %d\n%s\n%s", code, stdout, stderr)
	}
}

func TestBatchUsage(t *testing.T) {
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"batch", bidsRoot}, "--out is required"},
		{[]string{"batch", "--out", "x"}, "give exactly one BIDS_DIR"},
		{[]string{"batch", bidsRoot, "--out", "x", "--model", "MESE"}, "want SUFFIX=MODEL"},
		{[]string{"batch", bidsRoot, "--out", "x", "--model", "MESE=t9"}, "--model MESE=t9"},
		{[]string{"batch", "..", "--out", "x"}, "not a BIDS dataset"},
		{[]string{"batch", bidsRoot, "--out", bidsRoot}, "is the raw dataset itself"},
		{[]string{"batch", bidsRoot, "--out", "x", "--participant-label", "09"}, "sub-09 not found"},
	}
	for _, c := range cases {
		code, _, stderr := tauvox(t, c.args...)
		if code != 2 || !strings.Contains(stderr, c.want) || strings.Count(stderr, "\n") != 1 {
			t.Errorf("%v: %d %q, want %q", c.args, code, stderr, c.want)
		}
	}
}
