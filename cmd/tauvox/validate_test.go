package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestValidateCommand: the table, --json and --plot, and bad usage.
// The numbers themselves are checked in fit/validate_test.go.
func TestValidateCommand(t *testing.T) {
	code, out, errs := tauvox(t, "validate", "--model", "t2", "--te", "10:10:320", "--t2", "100", "--trials", "400", "--seed", "7")
	if code != 0 || !strings.Contains(out, "CRLB SD") || !strings.Contains(out, "0.978") {
		t.Fatalf("table: %d %s %s", code, out, errs)
	}
	svg := filepath.Join(t.TempDir(), "sd.svg")
	code, out, errs = tauvox(t, "validate", "--model", "t1-ir", "--t1", "500,1500", "--trials", "50", "--json", "--plot", svg, "--noise", "rician")
	if code != 0 {
		t.Fatalf("json: %d %s", code, errs)
	}
	var doc struct {
		Format string           `json:"format"`
		Rows   []map[string]any `json:"rows"`
	}
	if err := json.Unmarshal([]byte(out), &doc); err != nil || doc.Format != "tauvox-validation/1" || len(doc.Rows) != 2 {
		t.Fatalf("json: %v %+v", err, doc)
	}
	if b, err := os.ReadFile(svg); err != nil || !strings.Contains(string(b), "<svg") {
		t.Fatalf("plot: %v", err)
	}
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--model", "t1-ll"}, "validate supports"},
		{[]string{"--model", "t2", "--t1", "100"}, "--t1 does not apply"},
		{[]string{"--model", "t2", "--snr", "0"}, "--snr"},
		{[]string{"--model", "t2", "--plot", "x.pdf"}, "--plot"},
		{[]string{}, "--model is required"},
	} {
		code, _, errs := tauvox(t, append([]string{"validate"}, c.args...)...)
		if code != 2 || !strings.Contains(errs, c.want) {
			t.Errorf("%v: exit %d, %q (want %q)", c.args, code, errs, c.want)
		}
	}
}
