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
func TestChromiumRenders(t *testing.T) {
	if _, err := os.Stat(chromiumPath); err != nil {
		if os.Getenv("CI") == "" {
			t.Skipf("%s not installed (apt-get install chromium)", chromiumPath)
		}
		t.Fatalf("CI is set but %s is missing: %v", chromiumPath, err)
	}
	if testing.Short() {
		t.Skip("starts a browser")
	}
	dir := t.TempDir()
	page := filepath.Join(dir, "report.html")
	if err := Write(page, testPage(true)); err != nil {
		t.Fatal(err)
	}
	shot := filepath.Join(dir, "shot.png")
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, chromiumPath,
		"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir="+filepath.Join(dir, "profile"),
		"--enable-logging=stderr", "--v=0",
		"--screenshot="+shot, "--window-size=1200,2000",
		"file://"+page)
	// Chromium starts helper processes: run it in its own process group
	// and end that group (and only it) on time-out.
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	cmd.Cancel = func() error { return syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL) }
	cmd.WaitDelay = 5 * time.Second
	cmd.Env = append(os.Environ(), "HOME="+dir)
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
	colours, ink := census(img)
	// The page shows two colour maps and plots: thousands of colours and
	// a good share of non-white pixels. A blank or broken page has a
	// handful of colours.
	if colours < 200 || ink < 0.05 {
		t.Errorf("screenshot looks blank: %d distinct colours, %.1f %% non-white", colours, 100*ink)
	}
	if p := os.Getenv("TAUVOX_KEEP_SCREENSHOT"); p != "" {
		b, _ := os.ReadFile(shot)
		os.WriteFile(p, b, 0o644)
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
