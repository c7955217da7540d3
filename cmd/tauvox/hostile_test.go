package main

import (
	"bytes"
	"context"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// chromium is Debian's Chromium (package chromium), as in internal/report.
const chromium = "/usr/bin/chromium"

// dumpDOM loads page in headless Chromium and returns the serialised DOM
// after parsing, and the browser's log. Without Chromium the test is
// skipped, unless CI is set (CI installs it), where it fails.
func dumpDOM(t *testing.T, page string) (dom, log string) {
	t.Helper()
	if _, err := os.Stat(chromium); err != nil {
		if os.Getenv("CI") == "" {
			t.Skipf("%s not installed (apt-get install chromium)", chromium)
		}
		t.Fatalf("CI is set but %s is missing: %v", chromium, err)
	}
	dir := t.TempDir()
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, chromium,
		"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir="+filepath.Join(dir, "profile"),
		"--enable-logging=stderr", "--v=0", "--dump-dom", "file://"+page)
	// Chromium starts helper processes: its own process group, ended as a
	// whole (and only it) on time-out.
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	cmd.Cancel = func() error { return syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL) }
	cmd.WaitDelay = 5 * time.Second
	cmd.Env = append(os.Environ(), "HOME="+dir)
	var out, errs bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errs
	if err := cmd.Run(); err != nil {
		t.Fatalf("chromium: %v\n%s", err, errs.String())
	}
	return out.String(), errs.String()
}

// TestHostileStrings runs the whole chain on a DICOM series whose
// SeriesDescription is an HTML script and whose StationName is a path
// that climbs out of the folder: simulate → fit → phantom (report.html)
// → history add → history chart (index.html, one SVG per vial). The
// description and the station name appear in the reports as text
// (html/template escapes them; Chromium's parsed DOM holds no script
// element and its console stays silent), and every file written lies
// inside the folder named by --out (the station name becomes
// "x_<vial>_<quantity>.svg", never a path).
func TestHostileStrings(t *testing.T) {
	const desc, station = "<script>alert(1)</script>", "../../x"
	root := t.TempDir()
	work := filepath.Join(root, "a", "b") // ../../x from here would be root/x
	os.MkdirAll(work, 0o755)
	p := func(s string) string { return filepath.Join(work, s) }
	steps := [][]string{
		{"simulate", "--kind", "t2", "--format", "dicom", "--out", p("sim"), "--matrix", "48", "--slices", "2",
			"--description", desc, "--scanner", station, "--date", "2026-05-01"},
		{"fit", p("sim/t2"), "--model", "t2", "--out", p("maps"), "--quiet"},
		{"phantom", p("maps"), "--def", "demo", "--temperature", "20", "--out", p("qa")},
		{"phantom", p("maps"), "--def", "demo", "--temperature", "21", "--date", "2026-06-01", "--out", p("qa2")},
		{"history", "add", "--db", p("h.db"), p("qa/qa.json"), p("qa2/qa.json")},
		{"history", "chart", "--db", p("h.db"), "--out", p("charts"), "--baseline", "2"},
	}
	for _, s := range steps {
		if code, _, e := tauvox(t, s...); code > 1 {
			t.Fatalf("%v: exit %d: %s", s, code, e)
		}
	}
	// On disk: nothing outside the named outputs.
	allowed := []string{p("sim"), p("maps"), p("qa"), p("qa2"), p("charts"), p("h.db")}
	filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return nil
		}
		for _, a := range allowed {
			if path == a || strings.HasPrefix(path, a+string(filepath.Separator)) || strings.HasPrefix(path, a+"-") {
				return nil
			}
		}
		t.Errorf("file outside the outputs: %s", path)
		return nil
	})
	charts, _ := filepath.Glob(p("charts/*.svg"))
	if len(charts) == 0 {
		t.Fatal("no charts")
	}
	for _, c := range charts {
		if b := filepath.Base(c); !strings.HasPrefix(b, "x_") || strings.Contains(b, "..") {
			t.Errorf("chart file name %q", b)
		}
	}
	// The sources carry the strings (else the test proves nothing).
	prov, _ := os.ReadFile(p("maps/provenance.json"))
	if !bytes.Contains(prov, []byte(`\u003cscript\u003ealert(1)\u003c/script\u003e`)) && !bytes.Contains(prov, []byte(desc)) {
		t.Fatalf("provenance lacks the description: %.300s", prov)
	}
	for _, page := range []string{p("qa/report.html"), p("charts/index.html")} {
		raw, err := os.ReadFile(page)
		if err != nil {
			t.Fatal(err)
		}
		if bytes.Contains(raw, []byte("<script")) {
			t.Errorf("%s: holds a script element", page)
		}
		if !bytes.Contains(raw, []byte("../../x")) {
			t.Errorf("%s: the station name is not shown", page)
		}
		dom, log := dumpDOM(t, page)
		if strings.Contains(strings.ToLower(dom), "<script") {
			t.Errorf("%s: the parsed DOM holds a script element", page)
		}
		for _, line := range strings.Split(log, "\n") {
			if strings.Contains(line, ":CONSOLE") || strings.Contains(line, "Uncaught") {
				t.Errorf("%s: browser console: %s", page, line)
			}
		}
		if page == p("qa/report.html") {
			// Shown as text: the DOM serialises the text node escaped.
			if !strings.Contains(dom, "&lt;script&gt;alert(1)&lt;/script&gt;") {
				t.Errorf("%s: the description is not shown as text", page)
			}
		}
	}
}
