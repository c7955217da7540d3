package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/fit"
)

// TestHelpFromRegistry (issue 17): --version, help model(s) [M], every
// registered model in fit --help, the model's section first in fit --model
// M --help, and one option name for one meaning across commands.
func TestHelpFromRegistry(t *testing.T) {
	code, out, _ := tauvox(t, "--version")
	_, want, _ := tauvox(t, "version")
	if code != 0 || out != want || !strings.HasPrefix(out, "tauvox ") {
		t.Errorf("--version: %d %q, version %q", code, out, want)
	}
	for _, topic := range []string{"model", "models"} {
		code, out, _ := tauvox(t, "help", topic)
		for _, m := range fit.Models() {
			if code != 0 || !strings.Contains(out, "  "+m.Name+" ") {
				t.Errorf("help %s: %d, lacks %s", topic, code, m.Name)
			}
		}
	}
	_, fitHelp, _ := tauvox(t, "fit", "--help")
	for _, m := range fit.Models() {
		if !strings.Contains(fitHelp, "  "+m.Name+" ") {
			t.Errorf("fit --help lacks model %s", m.Name)
		}
		code, out, _ := tauvox(t, "fit", "--model", m.Name, "--help")
		if code != 0 || !strings.HasPrefix(out, "Model "+m.Name+": ") || !strings.Contains(out, m.Help) || !strings.Contains(out, "-out string") {
			t.Errorf("fit --model %s --help: %d, starts %q", m.Name, code, out[:min(len(out), 80)])
		}
		code, out2, _ := tauvox(t, "help", "model", m.Name)
		if code != 0 || !strings.HasPrefix(out, out2) {
			t.Errorf("help model %s: %d %q", m.Name, code, out2)
		}
	}
	if code, _, errs := tauvox(t, "help", "model", "t3"); code != 2 || !strings.Contains(errs, "unknown model") {
		t.Errorf("help model t3: %d %s", code, errs)
	}
	// One name for the face-down phantom in simulate and phantom.
	for _, c := range []string{"simulate", "phantom"} {
		if _, out, _ := tauvox(t, c, "--help"); !strings.Contains(out, "-mirrored") || strings.Contains(out, "-mirror ") {
			t.Errorf("%s --help: want --mirrored", c)
		}
	}
}

// TestDICOMProtocolHint (issue 17): a protocol error on DICOM input points
// to the DICOM headers, not to a sidecar beside a folder.
func TestDICOMProtocolHint(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "dcm")
	if code, _, errs := tauvox(t, "simulate", "--kind", "t2", "--format", "dicom", "--out", dir, "--matrix", "24", "--slices", "1"); code != 0 {
		t.Fatal(errs)
	}
	code, _, errs := tauvox(t, "fit", dir, "--model", "t1-ir", "--out", filepath.Join(t.TempDir(), "m"))
	if code != 2 || strings.Contains(errs, ".json") || !strings.Contains(errs, "the DICOM headers or --te/--ti/--tr/--fa give the parameters") {
		t.Errorf("%d %s", code, errs)
	}
}

// TestForceOwnFilesOnly (issue 17): fit --force replaces a folder that
// holds only tauvox's outputs, refuses one that also holds a file of the
// user's (exit 2, naming it, nothing touched), and replaces it when the
// user names the folder (--force=DIR); --force=DIR naming another folder
// is refused.
func TestForceOwnFilesOnly(t *testing.T) {
	series := simulated(t, "t2", "--matrix", "24")
	out := filepath.Join(t.TempDir(), "maps")
	fitTo := func(force string) (int, string) {
		code, _, errs := tauvox(t, "fit", series, "--model", "t2", "--out", out, "--quiet", force)
		return code, errs
	}
	if code, errs := fitTo("--no-preview"); code != 0 {
		t.Fatal(errs)
	}
	if code, errs := fitTo("--force"); code != 0 {
		t.Fatalf("own outputs: %d %s", code, errs)
	}
	mine := filepath.Join(out, "notes.txt")
	if err := os.WriteFile(mine, []byte("mine"), 0o644); err != nil {
		t.Fatal(err)
	}
	if code, errs := fitTo("--force"); code != 2 || !strings.Contains(errs, "holds files tauvox did not write (notes.txt)") || !strings.Contains(errs, "--force="+out) {
		t.Errorf("foreign file: %d %s", code, errs)
	}
	if b, err := os.ReadFile(mine); err != nil || string(b) != "mine" {
		t.Error("the user's file was touched")
	}
	if code, errs := fitTo("--force=" + filepath.Join(t.TempDir(), "other")); code != 2 || !strings.Contains(errs, "names another folder") {
		t.Errorf("another folder named: %d %s", code, errs)
	}
	if code, errs := fitTo("--force=" + out + "/"); code != 0 {
		t.Fatalf("named: %d %s", code, errs)
	}
	if _, err := os.Stat(mine); !os.IsNotExist(err) {
		t.Error("the named folder was not replaced")
	}
}
