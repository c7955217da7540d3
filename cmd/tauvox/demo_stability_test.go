package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestDemoStability runs the whole demo (12 monthly sessions, vial A7
// drifting by −5 %/yr): its stability summary names A7 as the only action
// item (its T1 drift reaches the 5 % tolerance within the 12-month
// horizon; the last session is outside it, not proven), drift.csv marks no other
// series as action, the chart command on its database exits 1 for that
// action item and names it; then its last report is printed (below).
func TestDemoStability(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo")
	}
	dir := t.TempDir()
	demo := filepath.Join(dir, "demo")
	code, stdout, stderr := tauvox(t, "demo", "--out", demo)
	if code != 0 {
		t.Fatal(stderr)
	}
	var summary string
	for _, l := range strings.Split(stdout, "\n") {
		if strings.HasPrefix(l, "Action:") {
			summary = l
		}
	}
	if !strings.HasPrefix(summary, "Action: A7 T1 (") || strings.Count(summary, "Action:") != 1 || strings.Contains(summary, "; A") {
		t.Errorf("summary %q, want A7 T1 as the only action item", summary)
	}
	b, err := os.ReadFile(filepath.Join(demo, "history", "drift.csv"))
	if err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(bytes.NewReader(b)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range recs[1:] {
		if (r[10] == "action") != (r[1] == "A7" && r[2] == "T1") {
			t.Errorf("drift.csv: %s %s finding %s", r[1], r[2], r[10])
		}
	}
	code, _, stderr = tauvox(t, "history", "chart", "--db", filepath.Join(demo, "history.db"), "--out", filepath.Join(dir, "charts"))
	if code != 1 || !strings.Contains(stderr, "1 action item(s)") {
		t.Errorf("chart: exit %d, %q; want 1 for one action item", code, stderr)
	}
	reports, _ := filepath.Glob(filepath.Join(demo, "session-*", "qa", "report.html"))
	if len(reports) != 12 {
		t.Fatalf("%d reports", len(reports))
	}
	// Paths recorded in qa.json and provenance.json name files that exist
	// after the command (not the demo's temporary folder), and no number
	// carries binary rounding residue (700.0000000000001).
	residue := regexp.MustCompile(`\d\.\d*(0000000000|9999999999)\d`)
	files, _ := filepath.Glob(filepath.Join(demo, "session-*", "*", "*.json"))
	files = append(files, reports...)
	paths := 0
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		if m := residue.Find(b); m != nil {
			t.Errorf("%s: number %s", f, m)
		}
		for _, m := range regexp.MustCompile(`"(?:path|map)": "([^"]+)"`).FindAllSubmatch(b, -1) {
			paths++
			if _, err := os.Stat(string(m[1])); err != nil {
				t.Errorf("%s names %s: %v", f, m[1], err)
			}
		}
	}
	if paths < 12*4 {
		t.Errorf("only %d recorded paths checked", paths)
	}
	// The demo's last report, and one remade with 'phantom --history',
	// show A7 T2 (inside tolerance, drifting) as warn with its reason.
	last := filepath.Dir(filepath.Dir(reports[len(reports)-1]))
	again := filepath.Join(dir, "again")
	code, _, stderr = tauvox(t, "phantom", filepath.Join(last, "fit-t2"), filepath.Join(last, "fit-t1-ir"), "--def", "demo",
		"--temperature", temperatureOf(t, filepath.Join(last, "qa", "qa.json")), "--out", again, "--history", filepath.Join(demo, "history.db"), "--quiet")
	if code != 1 {
		t.Fatalf("phantom --history: exit %d, %s (want 1: A7 T1 fails)", code, stderr)
	}
	for _, page := range []string{reports[len(reports)-1], filepath.Join(again, "report.html")} {
		b, _ := os.ReadFile(page)
		if !regexp.MustCompile(`<li>Warn: A7 T2 −[0-9.]+ % \(−[0-9.]+ ms\) against a tolerance of ±10.0 % \(±[0-9.]+ ms\); history: drift −[0-9.]+ %/yr`).Match(b) {
			t.Errorf("%s: no warn line for A7 T2", page)
		}
	}
	t.Run("print", func(t *testing.T) { printsOnA4(t, reports[len(reports)-1]) })
}

// temperatureOf returns the session temperature of a qa.json as text.
func temperatureOf(t *testing.T, path string) string {
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	m := regexp.MustCompile(`"temperature_C": ([0-9.]+)`).FindSubmatch(b)
	if m == nil {
		t.Fatalf("%s: no temperature", path)
	}
	return string(m[1])
}

// printsOnA4: the QA report, printed by headless Chromium
// (--print-to-pdf, the page's own print stylesheet), fills at most 3 A4
// pages. The pages are counted in the PDF itself: the /Count of its page
// tree and one A4 /MediaBox (595.28 × 841.89 pt, ISO 216) per page (PDF
// 32000-1:2008 §7.7.3).
func printsOnA4(t *testing.T, report string) {
	const chromium = "/usr/bin/chromium"
	if _, err := os.Stat(chromium); err != nil {
		if os.Getenv("CI") == "" {
			t.Skipf("%s not installed (apt-get install chromium)", chromium)
		}
		t.Fatalf("CI is set but %s is missing", chromium)
	}
	dir := t.TempDir()
	pdf := filepath.Join(dir, "report.pdf")
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, chromium,
		"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir="+filepath.Join(dir, "profile"), "--no-pdf-header-footer",
		"--print-to-pdf="+pdf, "file://"+report)
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	cmd.Cancel = func() error { return syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL) }
	cmd.WaitDelay = 5 * time.Second
	cmd.Env = append(os.Environ(), "HOME="+dir)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("chromium: %v\n%s", err, out)
	}
	b, err := os.ReadFile(pdf)
	if err != nil {
		t.Fatal(err)
	}
	pages, boxes := pdfPages(b)
	t.Logf("%d pages, media boxes %q", pages, boxes)
	if pages < 1 || pages > 3 {
		t.Errorf("the report prints on %d pages, want 1–3", pages)
	}
	if len(boxes) != pages {
		t.Errorf("%d media boxes for %d pages", len(boxes), pages)
	}
	for _, mb := range boxes {
		w, _ := strconv.ParseFloat(mb[1], 64)
		h, _ := strconv.ParseFloat(mb[2], 64)
		if abs(w-595.28) > 1.5 || abs(h-841.89) > 1.5 {
			t.Errorf("page of %g × %g pt, want A4 595.28 × 841.89", w, h)
		}
	}
}

// pdfPages returns the page count of the PDF's page tree root (the
// largest /Count of a /Type /Pages node) and the media boxes of its pages.
// Chromium writes these dictionaries uncompressed.
func pdfPages(b []byte) (int, [][]string) {
	count := 0
	for _, m := range regexp.MustCompile(`/Type\s*/Pages\b[^>]*?/Count\s+(\d+)|/Count\s+(\d+)[^>]*?/Type\s*/Pages\b`).FindAllSubmatch(b, -1) {
		s := m[1]
		if len(s) == 0 {
			s = m[2]
		}
		n, _ := strconv.Atoi(string(s))
		count = max(count, n)
	}
	var boxes [][]string
	for _, m := range regexp.MustCompile(`/MediaBox\s*\[\s*0\s+0\s+([0-9.]+)\s+([0-9.]+)\s*\]`).FindAllSubmatch(b, -1) {
		boxes = append(boxes, []string{string(m[0]), string(m[1]), string(m[2])})
	}
	if bytes.Count(b, []byte("/Type /Pages")) == 0 {
		return 0, boxes
	}
	return count, boxes
}

func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}
