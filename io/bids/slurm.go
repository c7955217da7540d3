package bids

import (
	"bufio"
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
)

// SlurmOptions are the settings of a SLURM array script. The zero value
// gives 4 CPUs, 4G of memory and one hour per task, and runs "tauvox"
// from the PATH.
type SlurmOptions struct {
	Out      string   // derivative dataset folder (required)
	Tauvox   string   // the tauvox executable; "" means "tauvox" (from the PATH)
	JobName  string   // job name; "" means "tauvox"
	CPUs     int      // CPUs per task, also the task's --workers; 0 means 4
	Mem      string   // memory per task in sbatch syntax (4G, 500M); "" means 4G
	Time     string   // time limit per task in sbatch syntax; "" means 01:00:00
	Models   []string // SUFFIX=MODEL values, each passed to every task as --model
	Batch    []string // further arguments of every task's tauvox batch
	Comments []string // extra comment lines written under the header
}

// Participants reads the participant labels (with their "sub-" prefix) of
// the dataset at root from the participant_id column of its
// participants.tsv (BIDS "Participants file"), in file order. A missing
// file or column, a label that is not sub-<alphanumeric>, a repeated label
// or no label at all is an error naming the file.
func Participants(root string) ([]string, error) {
	path := filepath.Join(root, "participants.tsv")
	raw, err := os.ReadFile(path)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, fmt.Errorf("%s: missing (the list of participants, BIDS)", path)
		}
		return nil, err
	}
	sc := bufio.NewScanner(bytes.NewReader(raw))
	col := -1
	var labels []string
	seen := map[string]bool{}
	for line := 0; sc.Scan(); line++ {
		text := strings.TrimRight(sc.Text(), "\r")
		fields := strings.Split(text, "\t")
		if line == 0 {
			for i, f := range fields {
				if strings.TrimSpace(f) == "participant_id" {
					col = i
				}
			}
			if col < 0 {
				return nil, fmt.Errorf("%s: no participant_id column in the header", path)
			}
			continue
		}
		if strings.TrimSpace(text) == "" {
			continue
		}
		if col >= len(fields) {
			return nil, fmt.Errorf("%s: line %d has no participant_id", path, line+1)
		}
		l := strings.TrimSpace(fields[col])
		v, ok := strings.CutPrefix(l, "sub-")
		if !ok || !alnum(v) {
			return nil, fmt.Errorf("%s: line %d: participant_id %q is not sub-<alphanumeric label>", path, line+1, l)
		}
		if seen[l] {
			return nil, fmt.Errorf("%s: participant %s listed twice", path, l)
		}
		seen[l] = true
		labels = append(labels, l)
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	if len(labels) == 0 {
		return nil, fmt.Errorf("%s: no participants listed", path)
	}
	return labels, nil
}

var (
	slurmMem  = regexp.MustCompile(`^[0-9]+[KMGT]?$`)
	slurmTime = regexp.MustCompile(`^([0-9]+-)?[0-9]+(:[0-9]{2}){0,2}$`)
)

// SlurmScript returns a bash script for sbatch that fits the dataset at
// root with one array task per participant of its participants.tsv: the
// array range is 1-N for N participants, task i runs
//
//	tauvox batch ROOT --out OUT --participant-label <i-th label> --workers $SLURM_CPUS_PER_TASK --quiet
//
// The labels are written into the script, so the tasks do not depend on
// the participants file changing after submission. Tasks write disjoint
// folders of one derivative dataset; a finished series is skipped, so a
// resubmitted script only does what is missing. root and opt.Out are made
// absolute. It returns the script and its number of array tasks. Bad
// options or a bad participants file give an error.
func SlurmScript(root string, opt *SlurmOptions) ([]byte, int, error) {
	o := *opt
	if o.Out == "" {
		return nil, 0, fmt.Errorf("slurm script: no derivative folder given")
	}
	if o.Tauvox == "" {
		o.Tauvox = "tauvox"
	}
	if o.JobName == "" {
		o.JobName = "tauvox"
	}
	if o.CPUs == 0 {
		o.CPUs = 4
	}
	if o.Mem == "" {
		o.Mem = "4G"
	}
	if o.Time == "" {
		o.Time = "01:00:00"
	}
	switch {
	case o.CPUs < 0:
		return nil, 0, fmt.Errorf("slurm script: CPUs per task must be positive, not %d", o.CPUs)
	case !slurmMem.MatchString(o.Mem):
		return nil, 0, fmt.Errorf("slurm script: memory %q is not a size such as 4G or 500M", o.Mem)
	case !slurmTime.MatchString(o.Time):
		return nil, 0, fmt.Errorf("slurm script: time limit %q is not [D-]HH:MM:SS", o.Time)
	case !alnumDash(o.JobName):
		return nil, 0, fmt.Errorf("slurm script: job name %q: use letters, digits, - and _", o.JobName)
	}
	labels, err := Participants(root)
	if err != nil {
		return nil, 0, err
	}
	absRoot, err := filepath.Abs(root)
	if err != nil {
		return nil, 0, err
	}
	absOut, err := filepath.Abs(o.Out)
	if err != nil {
		return nil, 0, err
	}
	var b bytes.Buffer
	fmt.Fprintf(&b, "#!/bin/bash\n")
	fmt.Fprintf(&b, "#SBATCH --job-name=%s\n", o.JobName)
	fmt.Fprintf(&b, "#SBATCH --array=1-%d\n", len(labels))
	fmt.Fprintf(&b, "#SBATCH --cpus-per-task=%d\n", o.CPUs)
	fmt.Fprintf(&b, "#SBATCH --mem=%s\n", o.Mem)
	fmt.Fprintf(&b, "#SBATCH --time=%s\n", o.Time)
	fmt.Fprintf(&b, "# One participant of %s per array task (written by tauvox batch --slurm-script).\n", absRoot)
	for _, c := range o.Comments {
		fmt.Fprintf(&b, "# %s\n", strings.ReplaceAll(c, "\n", " "))
	}
	fmt.Fprintf(&b, "set -euo pipefail\n")
	fmt.Fprintf(&b, "BIDS=%s\n", shellQuote(absRoot))
	fmt.Fprintf(&b, "DERIV=%s\n", shellQuote(absOut))
	fmt.Fprintf(&b, "labels=(%s)\n", strings.Join(labels, " "))
	fmt.Fprintf(&b, "label=${labels[$((SLURM_ARRAY_TASK_ID - 1))]}\n")
	cmd := []string{shellQuote(o.Tauvox), "batch", `"$BIDS"`, "--out", `"$DERIV"`, "--participant-label", `"$label"`, "--workers", `"${SLURM_CPUS_PER_TASK:-1}"`, "--quiet"}
	for _, m := range o.Models {
		cmd = append(cmd, "--model", shellQuote(m))
	}
	for _, a := range o.Batch {
		cmd = append(cmd, shellQuote(a))
	}
	fmt.Fprintf(&b, "srun %s\n", strings.Join(cmd, " "))
	return b.Bytes(), len(labels), nil
}

func alnumDash(s string) bool {
	return s != "" && alnum(strings.NewReplacer("-", "", "_", "").Replace(s)+"x")
}

// shellQuote quotes s for bash: unchanged when it holds only safe
// characters, otherwise in single quotes.
func shellQuote(s string) string {
	if s != "" && strings.Trim(s, "abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789/._-=+:,@") == "" {
		return s
	}
	return "'" + strings.ReplaceAll(s, "'", `'\''`) + "'"
}

// WriteSlurmScript writes SlurmScript(root, opt) to path (mode 0755)
// through a temporary file in the same folder, so that a failure leaves
// nothing behind. An existing path is replaced only when replace is set.
// It returns the number of array tasks.
func WriteSlurmScript(path, root string, opt *SlurmOptions, replace bool) (int, error) {
	script, n, err := SlurmScript(root, opt)
	if err != nil {
		return 0, err
	}
	if _, err := os.Lstat(path); err == nil && !replace {
		return 0, fmt.Errorf("%s: exists (use --force to replace it)", path)
	}
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return 0, err
	}
	_, err = f.Write(script)
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Chmod(f.Name(), 0o755)
	}
	if err == nil {
		err = os.Rename(f.Name(), path)
	}
	if err != nil {
		os.Remove(f.Name())
		return 0, fmt.Errorf("%s: %v", path, err)
	}
	return n, nil
}
