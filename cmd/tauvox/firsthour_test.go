package main

import (
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
