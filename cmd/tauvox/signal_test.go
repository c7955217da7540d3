package main

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/roi/history"
	"github.com/tauvox/tauvox/roi/phantom"
)

// child returns the test binary as a tauvox command (see TestMain).
func child(t *testing.T, env []string, args ...string) (*exec.Cmd, *bytes.Buffer) {
	t.Helper()
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(exe, args...)
	cmd.Env = append(append(os.Environ(), "TAUVOX_TEST_CHILD=1"), env...)
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &out
	return cmd, &out
}

// waitFor polls until cond holds or the time runs out.
func waitFor(t *testing.T, what string, d time.Duration, cond func() bool) {
	t.Helper()
	for end := time.Now().Add(d); time.Now().Before(end); time.Sleep(10 * time.Millisecond) {
		if cond() {
			return
		}
	}
	t.Fatalf("timed out waiting for %s", what)
}

// stageOf returns the temporary folders of an output folder's stage.
func stageOf(out string) []string {
	m, _ := filepath.Glob(filepath.Join(filepath.Dir(out), "."+filepath.Base(out)+".tmp-*"))
	return m
}

// slowFit starts a fit slow enough to be interrupted: the gonum optimiser
// (about 0.1 ms a voxel) on one worker, 64×64×4 voxels, in slabs of one
// slice (--memory 1M) so that maps are appended to the stage during the
// fit, not only at the end.
func slowFit(t *testing.T, out string) (*exec.Cmd, *bytes.Buffer) {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "sim")
	if code, _, e := tauvox(t, "simulate", "--kind", "t2", "--out", dir, "--matrix", "64", "--slices", "4"); code != 0 {
		t.Fatal(e)
	}
	cmd, buf := child(t, nil, "fit", filepath.Join(dir, "t2.nii.gz"), "--model", "t2", "--gonum", "--workers", "1",
		"--memory", "1M", "--out", out, "--quiet")
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if cmd.ProcessState == nil {
			cmd.Process.Kill()
			cmd.Wait()
		}
	})
	return cmd, buf
}

// TestInterrupt: SIGINT and SIGTERM during a fit stop the workers, remove
// the temporary folder and exit 130 with one line; no output exists.
func TestInterrupt(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a subprocess")
	}
	for _, sig := range []syscall.Signal{syscall.SIGINT, syscall.SIGTERM} {
		out := filepath.Join(t.TempDir(), "maps")
		cmd, buf := slowFit(t, out)
		waitFor(t, "the stage", 20*time.Second, func() bool { return len(stageOf(out)) > 0 })
		time.Sleep(300 * time.Millisecond) // into the fit
		t0 := time.Now()
		cmd.Process.Signal(sig)
		err := cmd.Wait()
		code := cmd.ProcessState.ExitCode()
		t.Logf("%v: exit %d after %v: %s", sig, code, time.Since(t0), strings.TrimSpace(buf.String()))
		if code != 130 {
			t.Errorf("%v: exit %d (%v), want 130: %s", sig, code, err, buf)
		}
		if !strings.Contains(buf.String(), "interrupted; no output was written") {
			t.Errorf("%v: message %q", sig, buf)
		}
		if _, err := os.Stat(out); err == nil {
			t.Errorf("%v: output folder exists", sig)
		}
		if s := stageOf(out); len(s) > 0 {
			t.Errorf("%v: temporary folder left: %v", sig, s)
		}
		if entries, _ := os.ReadDir(filepath.Dir(out)); len(entries) != 0 {
			t.Errorf("%v: left in the output's parent: %v", sig, entries)
		}
	}
}

// TestKilled: a fit killed with SIGKILL while it appends maps leaves no
// file that looks complete (no output folder; what was written lies in
// the hidden temporary folder only), and running it again succeeds.
func TestKilled(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a subprocess")
	}
	out := filepath.Join(t.TempDir(), "maps")
	cmd, _ := slowFit(t, out)
	// Wait until a map in the stage holds data: the kill lands mid-write.
	waitFor(t, "a map being written", 30*time.Second, func() bool {
		for _, s := range stageOf(out) {
			m, _ := filepath.Glob(filepath.Join(s, "*.nii*"))
			for _, p := range m {
				if st, err := os.Stat(p); err == nil && st.Size() > 0 {
					return true
				}
			}
		}
		return false
	})
	cmd.Process.Kill()
	cmd.Wait()
	if _, err := os.Stat(out); err == nil {
		t.Fatal("output folder exists after SIGKILL")
	}
	left := stageOf(out)
	t.Logf("after SIGKILL: %v", left)
	// Nothing outside the hidden stage: a reader of the parent folder sees
	// no maps.
	entries, _ := os.ReadDir(filepath.Dir(out))
	for _, e := range entries {
		if !strings.HasPrefix(e.Name(), ".maps.tmp-") {
			t.Errorf("after SIGKILL: %s in the output's parent", e.Name())
		}
	}
	// The rerun (in-process) succeeds and writes complete maps.
	series := cmd.Args[2] // [exe fit SERIES ...]
	code, _, stderr := tauvox(t, "fit", series, "--model", "t2", "--out", out, "--quiet")
	if code != 0 {
		t.Fatalf("rerun: exit %d: %s", code, stderr)
	}
	m, err := nifti.Read(filepath.Join(out, "T2map.nii.gz"))
	if err != nil || m.Dims != [4]int{64, 64, 4, 1} {
		t.Fatalf("rerun map: %v %v", err, m)
	}
	// The killed run's temporary folder, whose owner lock died with it,
	// is swept by the rerun; the owner file does not reach the output.
	if len(left) == 0 {
		t.Error("SIGKILL left no temporary folder: the kill did not land mid-write")
	}
	if s := stageOf(out); len(s) > 0 {
		t.Errorf("after the rerun: abandoned temporary folder kept: %v", s)
	}
	if _, err := os.Stat(filepath.Join(out, ".tauvox-owner")); err == nil {
		t.Error("owner file left in the output")
	}
}

// TestDiskFull: a fit whose output cannot be written gives one clear
// line, exit 2, and leaves no output and no temporary folder. Two ways to
// fill the disk: a 64 KiB tmpfs mounted for the test (needs root; skipped
// otherwise) gives ENOSPC; a file-size limit (RLIMIT_FSIZE, no root
// needed) gives EFBIG on the first write past it.
func TestDiskFull(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a subprocess")
	}
	dir := filepath.Join(t.TempDir(), "sim")
	if code, _, e := tauvox(t, "simulate", "--kind", "t2", "--out", dir, "--matrix", "48", "--slices", "2"); code != 0 {
		t.Fatal(e)
	}
	series := filepath.Join(dir, "t2.nii.gz")
	check := func(name, out, want string, env []string) {
		t.Helper()
		cmd, buf := child(t, env, "fit", series, "--model", "t2", "--out", out, "--quiet")
		cmd.Run()
		code := cmd.ProcessState.ExitCode()
		msg := strings.TrimSpace(buf.String())
		t.Logf("%s: exit %d: %s", name, code, msg)
		if code != 2 || strings.Count(msg, want) != 1 || strings.Contains(msg, "\n") {
			t.Errorf("%s: exit %d %q, want 2 and one line saying %q once", name, code, msg, want)
		}
		if _, err := os.Stat(out); err == nil {
			t.Errorf("%s: output folder exists", name)
		}
		if s := stageOf(out); len(s) > 0 {
			t.Errorf("%s: temporary folder left: %v", name, s)
		}
	}
	t.Run("tmpfs", func(t *testing.T) {
		mnt := t.TempDir()
		if os.Geteuid() != 0 {
			t.Skip("mounting a small tmpfs needs root")
		}
		if err := syscall.Mount("tmpfs", mnt, "tmpfs", 0, "size=64k"); err != nil {
			t.Skipf("cannot mount a tmpfs here: %v", err)
		}
		defer syscall.Unmount(mnt, 0)
		out := filepath.Join(mnt, "maps")
		check("tmpfs 64 KiB", out, "no space left on device", nil)
		if entries, _ := os.ReadDir(mnt); len(entries) != 0 {
			t.Errorf("left on the full disk: %v", entries)
		}
	})
	t.Run("rlimit", func(t *testing.T) {
		out := filepath.Join(t.TempDir(), "maps")
		check("RLIMIT_FSIZE 8 KiB", out, "file too large", []string{"TAUVOX_TEST_FSIZE=" + strconv.Itoa(8<<10)})
	})
}

// bigHistory records n monthly sessions of one scanner with vials vial
// results each (IDs V0…, quantity T1, deviations scattered by 1 %) in a new
// database, directly through roi/history, and returns its path.
func bigHistory(t *testing.T, n, vials int) string {
	t.Helper()
	db := filepath.Join(t.TempDir(), "big.db")
	s, err := history.Open(db, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	ctx := context.Background()
	for k := 0; k < n; k++ {
		q := phantom.QA{Format: phantom.QAFormat, Tool: phantom.Tool{Name: "tauvox", Version: "test"},
			Session: phantom.Session{Scanner: "MR-BIG", Date: time.Date(2024, time.Month(1+k), 3, 0, 0, 0, 0, time.UTC).Format("2006-01-02"),
				Time: "09:00", Field: 1.5, Temperature: 20, Phantom: "big"}, Verdict: phantom.Pass}
		for v := 0; v < vials; v++ {
			dev := float64((v*7+k*13)%21-10) / 10 // −1 … +1 %
			med := 1000 * (1 + dev/100)
			q.Vials = append(q.Vials, phantom.VialQA{ID: "V" + strconv.Itoa(v), Quantity: "T1", N: 40, Median: med, Mean: med, SD: 5,
				Reference: 1000, RefUncPct: 1, Deviation: dev, Tolerance: 50, Verdict: phantom.Pass})
		}
		b, err := json.Marshal(q)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := s.Add(ctx, b, "big.json"); err != nil {
			t.Fatal(err)
		}
	}
	return db
}

// TestInterruptChart: SIGINT and SIGTERM while history chart draws the
// charts of a large database (1000 vial series × 24 sessions: several
// seconds of drawing) end it within a second with exit 130, one line, and
// no output folder or temporary folder; the database is unchanged.
func TestInterruptChart(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a subprocess")
	}
	db := bigHistory(t, 24, 1000)
	before, _ := os.ReadFile(db)
	for _, sig := range []syscall.Signal{syscall.SIGINT, syscall.SIGTERM} {
		out := filepath.Join(t.TempDir(), "charts")
		cmd, buf := child(t, nil, "history", "chart", "--db", db, "--out", out)
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		// Wait until charts are being written into the stage.
		waitFor(t, "charts being drawn", 60*time.Second, func() bool {
			for _, s := range stageOf(out) {
				if m, _ := filepath.Glob(filepath.Join(s, "*.svg")); len(m) > 0 {
					return true
				}
			}
			return false
		})
		t0 := time.Now()
		cmd.Process.Signal(sig)
		done := make(chan struct{})
		go func() { cmd.Wait(); close(done) }()
		select {
		case <-done:
		case <-time.After(10 * time.Second):
			cmd.Process.Kill()
			<-done
			t.Fatalf("%v: history chart still running 10 s after the signal", sig)
		}
		took := time.Since(t0)
		code := cmd.ProcessState.ExitCode()
		t.Logf("%v: exit %d after %v: %s", sig, code, took, strings.TrimSpace(buf.String()))
		if code != 130 || took > time.Second {
			t.Errorf("%v: exit %d after %v, want 130 within 1 s: %s", sig, code, took, buf)
		}
		if strings.Count(strings.TrimSpace(buf.String()), "\n") != 0 {
			t.Errorf("%v: want one line: %q", sig, buf)
		}
		if _, err := os.Stat(out); err == nil {
			t.Errorf("%v: output folder exists", sig)
		}
		if s := stageOf(out); len(s) > 0 {
			t.Errorf("%v: temporary folder left: %v", sig, s)
		}
	}
	if after, _ := os.ReadFile(db); string(after) != string(before) {
		t.Error("the database changed")
	}
}
