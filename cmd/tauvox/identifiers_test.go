package main

import (
	"bytes"
	"encoding/json"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// patientIDs are the identifiers pydicom wrote into the mixed folder
// (testdata/gen/dicom_refs.py: PatientName, PatientID, PatientBirthDate,
// AccessionNumber).
var patientIDs = []string{"Phantom^Test", "PHANTOM-001", "19000101", "ACC0001"}

// TestNoIdentifiers: a fit of a DICOM series carrying a patient name, ID,
// birth date and accession number, and the phantom QA, history record and
// charts made from it, hold none of them in any file (maps, sidecars,
// provenance, qa.json, qa.csv, report.html, the database, charts); scan
// shows them only with --keep-identifiers.
func TestNoIdentifiers(t *testing.T) {
	mix := filepath.Join("..", "..", "testdata", "dicom", "mix")
	_, withIDs, _ := tauvox(t, "scan", mix, "--json", "--keep-identifiers")
	for _, id := range patientIDs {
		if !bytes.Contains([]byte(withIDs), []byte(id)) {
			t.Fatalf("scan --keep-identifiers lacks %q: the input does not carry it", id)
		}
	}
	code, plain, stderr := tauvox(t, "scan", mix, "--json")
	_, table, _ := tauvox(t, "scan", mix)
	if code != 0 {
		t.Fatal(stderr)
	}
	for _, id := range patientIDs {
		if bytes.Contains([]byte(plain+table), []byte(id)) {
			t.Errorf("scan without --keep-identifiers shows %q", id)
		}
	}
	root := t.TempDir()
	p := func(s string) string { return filepath.Join(root, s) }
	// The mixed folder's series for the four identifiers; a simulated
	// phantom series, whose PatientName and PatientID are "TAUVOX^DEMO"
	// (io/dicom WriteOptions.PhantomName), for the QA chain after the fit.
	steps := [][]string{
		{"fit", mix, "--series", "3-cd6369", "--model", "t2", "--out", p("maps"), "--quiet"},
		{"simulate", "--kind", "t2", "--format", "dicom", "--out", p("sim"), "--matrix", "48", "--slices", "2", "--date", "2026-05-01"},
		{"fit", p("sim/t2"), "--model", "t2", "--out", p("simmaps"), "--quiet"},
		{"phantom", p("simmaps"), "--def", "demo", "--temperature", "20", "--out", p("qa")},
		{"phantom", p("simmaps"), "--def", "demo", "--temperature", "21", "--date", "2026-06-01", "--out", p("qa2")},
		{"history", "add", "--db", p("h.db"), p("qa/qa.json"), p("qa2/qa.json")},
		{"history", "chart", "--db", p("h.db"), "--out", p("charts"), "--baseline", "2"},
		{"history", "export", "--db", p("h.db"), "--out", p("export.csv")},
	}
	for _, s := range steps {
		if code, _, e := tauvox(t, s...); code > 1 {
			t.Fatalf("%v: exit %d: %s", s, code, e)
		}
	}
	n := 0
	filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return nil
		}
		n++
		if strings.HasPrefix(path, p("sim")+string(filepath.Separator)) {
			return nil // the simulated input itself
		}
		b, _ := os.ReadFile(path)
		for _, id := range append(patientIDs, "TAUVOX^DEMO") {
			if bytes.Contains(b, []byte(id)) {
				t.Errorf("%s holds %q", path, id)
			}
		}
		return nil
	})
	if n < 15 {
		t.Errorf("only %d files written", n)
	}
}

// TestKeepIdentifiersFit: with --keep-identifiers, fit copies the four
// patient identifiers into provenance.json (and nowhere else among the
// maps); a phantom QA made from those maps still holds none of them,
// since phantom sessions are named by scanner and date.
func TestKeepIdentifiersFit(t *testing.T) {
	mix := filepath.Join("..", "..", "testdata", "dicom", "mix")
	root := t.TempDir()
	p := func(s string) string { return filepath.Join(root, s) }
	steps := [][]string{
		{"fit", mix, "--series", "3-cd6369", "--model", "t2", "--out", p("maps"), "--quiet", "--keep-identifiers"},
		{"simulate", "--kind", "t2", "--format", "dicom", "--out", p("sim"), "--matrix", "48", "--slices", "2", "--date", "2026-05-01"},
		{"fit", p("sim/t2"), "--model", "t2", "--out", p("simmaps"), "--quiet", "--keep-identifiers"},
		{"phantom", p("simmaps"), "--def", "demo", "--temperature", "20", "--out", p("qa")},
	}
	for _, s := range steps {
		if code, _, e := tauvox(t, s...); code > 1 {
			t.Fatalf("%v: exit %d: %s", s, code, e)
		}
	}
	var prov struct {
		Patient *struct {
			Name      string `json:"name"`
			ID        string `json:"id"`
			BirthDate string `json:"birth_date"`
			Accession string `json:"accession_number"`
		} `json:"patient"`
	}
	b, err := os.ReadFile(p("maps/provenance.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &prov); err != nil {
		t.Fatal(err)
	}
	if prov.Patient == nil {
		t.Fatalf("provenance.json has no patient block:\n%s", b)
	}
	got := []string{prov.Patient.Name, prov.Patient.ID, prov.Patient.BirthDate, prov.Patient.Accession}
	for i, want := range patientIDs {
		if got[i] != want {
			t.Errorf("patient field %d = %q, want %q", i, got[i], want)
		}
	}
	sim, _ := os.ReadFile(p("simmaps/provenance.json"))
	if !bytes.Contains(sim, []byte("TAUVOX^DEMO")) {
		t.Errorf("simulated series' provenance lacks its phantom name:\n%s", sim)
	}
	filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() || filepath.Base(path) == "provenance.json" ||
			strings.HasPrefix(path, p("sim")+string(filepath.Separator)) {
			return nil
		}
		b, _ := os.ReadFile(path)
		for _, id := range append(patientIDs, "TAUVOX^DEMO") {
			if bytes.Contains(b, []byte(id)) {
				t.Errorf("%s holds %q", path, id)
			}
		}
		return nil
	})
}
