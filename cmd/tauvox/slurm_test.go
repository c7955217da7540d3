package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestBatchSlurmScript: --slurm-script writes the array script for the
// committed two-participant dataset (array 1-2, the --slurm-* values, the
// --model flags repeated) and fits nothing; a dataset without
// participants.tsv is refused with exit code 2 and one line.
func TestBatchSlurmScript(t *testing.T) {
	dir := t.TempDir()
	job := filepath.Join(dir, "job.sh")
	deriv := filepath.Join(dir, "deriv")
	code, stdout, stderr := tauvox(t, "batch", "../../testdata/bids", "--out", deriv, "--slurm-script", job, "--slurm-cpus", "2", "--slurm-mem", "1G", "--model", "VFA=skip")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if !strings.Contains(stdout, "2 array tasks") {
		t.Errorf("stdout %q", stdout)
	}
	raw, err := os.ReadFile(job)
	if err != nil {
		t.Fatal(err)
	}
	s := string(raw)
	for _, want := range []string{"#SBATCH --array=1-2\n", "#SBATCH --cpus-per-task=2\n", "#SBATCH --mem=1G\n", "labels=(sub-01 sub-02)\n", "--quiet --model VFA=skip\n"} {
		if !strings.Contains(s, want) {
			t.Errorf("script lacks %q:\n%s", want, s)
		}
	}
	if _, err := os.Stat(deriv); !os.IsNotExist(err) {
		t.Errorf("derivative folder created: %v", err)
	}
	if code, _, _ := tauvox(t, "batch", "../../testdata/bids", "--out", deriv, "--slurm-script", job); code != 2 {
		t.Errorf("existing script replaced without --force: exit %d", code)
	}
	empty := t.TempDir()
	os.WriteFile(filepath.Join(empty, "dataset_description.json"), []byte(`{"Name":"x","BIDSVersion":"1.9.0"}`), 0o644)
	code, _, stderr = tauvox(t, "batch", empty, "--out", deriv, "--slurm-script", filepath.Join(dir, "b.sh"))
	if code != 2 || !strings.Contains(stderr, "participants.tsv: missing") || strings.Count(strings.TrimSpace(stderr), "\n") != 0 {
		t.Errorf("no participants.tsv: exit %d %q", code, stderr)
	}
}
