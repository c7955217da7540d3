package report

import (
	"bytes"
	"context"
	"image"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// chromiumPath is Debian's Chromium (package chromium).
const chromiumPath = "/usr/bin/chromium"

// TestChromiumRenders opens the report (with hostile strings in it) in
// headless Chromium, takes a screenshot and checks that the page drew
// something and logged nothing to the JavaScript console: the page has no
// script, so any console line (an error, a blocked resource, or the
// marker an injected script would print) is a failure.
//
// Without Chromium the test is skipped, unless CI is set (CI installs
// it), where it fails.
// screenshot opens page in headless Chromium (flags as the machine's
// probe used them: no sandbox, no GPU, no background networking) and
// returns the 1200×2000 screenshot. It skips when Chromium is missing,
// unless CI is set, and fails on any browser-console message.
func screenshot(t *testing.T, page string) image.Image {
	t.Helper()
	if _, err := os.Stat(chromiumPath); err != nil {
		if os.Getenv("CI") == "" {
			t.Skipf("%s not installed (apt-get install chromium)", chromiumPath)
		}
		t.Fatalf("CI is set but %s is missing: %v", chromiumPath, err)
	}
	if testing.Short() {
		t.Skip("starts a browser")
	}
	work := t.TempDir()
	shot := filepath.Join(work, "shot.png")
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, chromiumPath,
		"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir="+filepath.Join(work, "profile"),
		"--enable-logging=stderr", "--v=0",
		"--screenshot="+shot, "--window-size=1200,2000",
		"file://"+page)
	// Chromium starts helper processes: run it in its own process group
	// and end that group (and only it) on time-out.
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	cmd.Cancel = func() error { return syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL) }
	cmd.WaitDelay = 5 * time.Second
	cmd.Env = append(os.Environ(), "HOME="+work)
	var stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &stderr, &stderr
	err := cmd.Run()
	if ctx.Err() != nil {
		t.Fatalf("chromium did not finish within 60 s:\n%s", tail(stderr.String(), 20))
	}
	if err != nil {
		t.Fatalf("chromium: %v\n%s", err, tail(stderr.String(), 20))
	}
	for _, line := range strings.Split(stderr.String(), "\n") {
		if strings.Contains(line, ":CONSOLE") || strings.Contains(line, "Uncaught") || strings.Contains(line, "tauvox-injected") {
			t.Errorf("browser console: %s", line)
		}
	}
	f, err := os.Open(shot)
	if err != nil {
		t.Fatalf("no screenshot: %v\n%s", err, tail(stderr.String(), 20))
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("screenshot: %v", err)
	}
	if b := img.Bounds(); b.Dx() != 1200 || b.Dy() != 2000 {
		t.Errorf("screenshot is %v, want 1200×2000", b)
	}
	if p := os.Getenv("TAUVOX_KEEP_SCREENSHOT"); p != "" {
		b, _ := os.ReadFile(shot)
		os.WriteFile(p, b, 0o644)
	}
	return img
}

func TestChromiumRenders(t *testing.T) {
	dir := t.TempDir()
	page := filepath.Join(dir, "report.html")
	if err := Write(page, testPage(true)); err != nil {
		t.Fatal(err)
	}
	img := screenshot(t, page)
	colours, ink := census(img)
	// The page shows two colour maps and plots: thousands of colours and
	// a good share of non-white pixels. A blank or broken page has a
	// handful of colours.
	if colours < 200 || ink < 0.05 {
		t.Errorf("screenshot looks blank: %d distinct colours, %.1f %% non-white", colours, 100*ink)
	}
}

// TestDemoIndexChromium: the demo's front page, with a hostile scanner
// name, renders and is not blank.
func TestDemoIndexChromium(t *testing.T) {
	dir := t.TempDir()
	page := filepath.Join(dir, "index.html")
	d := &DemoIndex{Scanner: "<script>alert(1)</script>", Phantom: "demo", History: "history/index.html", Drifting: []string{"A7 T1"}}
	for i := 0; i < 12; i++ {
		d.Sessions = append(d.Sessions, DemoSession{Date: "2026-01-10", Time: "08:30", Temperature: 21, Verdict: "pass", Report: "session/qa/report.html"})
	}
	if err := WriteDemoIndex(page, d); err != nil {
		t.Fatal(err)
	}
	b, _ := os.ReadFile(page)
	if strings.Contains(string(b), "<script>alert") || !strings.Contains(string(b), "&lt;script&gt;") {
		t.Error("scanner name not escaped")
	}
	colours, ink := census(screenshot(t, page))
	if colours < 20 || ink < 0.01 {
		t.Errorf("screenshot looks blank: %d distinct colours, %.1f %% non-white", colours, 100*ink)
	}
}

// census returns the number of distinct colours of img and the fraction
// of its pixels that are not white.
func census(img image.Image) (colours int, ink float64) {
	seen := map[uint32]bool{}
	var n, dark int
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			key := (r>>8)<<16 | (g>>8)<<8 | bl>>8
			seen[key] = true
			n++
			if key != 0xffffff {
				dark++
			}
		}
	}
	return len(seen), float64(dark) / float64(n)
}

func tail(s string, n int) string {
	lines := strings.Split(strings.TrimRight(s, "\n"), "\n")
	if len(lines) > n {
		lines = lines[len(lines)-n:]
	}
	return strings.Join(lines, "\n")
}
