package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestModelTable: the model table of docs/methods.md is the registry's
// (modelTable); with -update the document is rewritten.
func TestModelTable(t *testing.T) {
	path := filepath.Join("..", "..", "docs", "methods.md")
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	const begin, end = "<!-- models:begin -->\n", "<!-- models:end -->"
	doc := string(b)
	i, j := strings.Index(doc, begin), strings.Index(doc, end)
	if i < 0 || j < i {
		t.Fatalf("%s: no %q … %q section", path, begin, end)
	}
	want := modelTable()
	if got := doc[i+len(begin) : j]; got != want {
		if *update {
			if err := os.WriteFile(path, []byte(doc[:i+len(begin)]+want+doc[j:]), 0o644); err != nil {
				t.Fatal(err)
			}
			return
		}
		t.Errorf("%s: the model table differs from the registry; run go test ./cmd/tauvox -run ModelTable -update\n%s", path, want)
	}
	for _, m := range []string{"t2", "t2star", "t1-ir", "t1-vfa", "t1-sr", "t1-ll", "t2-epg", "t2-spectrum"} {
		if !strings.Contains(want, "| `"+m+"` |") {
			t.Errorf("model %s missing from the table", m)
		}
	}
}
