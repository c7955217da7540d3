package main

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"syscall"
	"testing"
	"time"
)

// TestReportPrintsOnA4: the last QA report of a demo run, printed by
// headless Chromium (--print-to-pdf, the page's own print stylesheet),
// fills at most 3 A4 pages. The pages are counted in the PDF itself: the
// /Count of its page tree and one A4 /MediaBox (595.28 × 841.89 pt, ISO
// 216) per page (PDF 32000-1:2008 §7.7.3).
func TestReportPrintsOnA4(t *testing.T) {
	const chromium = "/usr/bin/chromium"
	if _, err := os.Stat(chromium); err != nil {
		if os.Getenv("CI") == "" {
			t.Skipf("%s not installed (apt-get install chromium)", chromium)
		}
		t.Fatalf("CI is set but %s is missing", chromium)
	}
	if testing.Short() {
		t.Skip("runs the demo and a browser")
	}
	dir := t.TempDir()
	demo := filepath.Join(dir, "demo")
	if code, _, stderr := tauvox(t, "demo", "--out", demo, "--sessions", "3"); code != 0 {
		t.Fatal(stderr)
	}
	reports, _ := filepath.Glob(filepath.Join(demo, "session-*", "qa", "report.html"))
	if len(reports) != 3 {
		t.Fatalf("%d reports", len(reports))
	}
	pdf := filepath.Join(dir, "report.pdf")
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, chromium,
		"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir="+filepath.Join(dir, "profile"), "--no-pdf-header-footer",
		"--print-to-pdf="+pdf, "file://"+reports[len(reports)-1])
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
