package cli

import (
	"bytes"
	"errors"
	"strings"
	"testing"
)

// TestParse: flags before and after positional arguments, "--" ending the
// flags, --help printing the usage to the FlagSet's writer (ErrHelp), and a
// positional argument where none is allowed refused in one line.
func TestParse(t *testing.T) {
	var out bytes.Buffer
	fs := NewFlags("fit", "SERIES", "Fits.", &out)
	n := fs.Int("n", 0, "a number")
	var pos []string
	if err := Parse(fs, []string{"a", "-n", "3", "b", "--", "-c"}, &pos); err != nil || *n != 3 || strings.Join(pos, " ") != "a b -c" {
		t.Errorf("parse: %v, n %d, pos %q", err, *n, pos)
	}
	fs = NewFlags("fit", "SERIES", "Fits a model.", &out)
	if err := Parse(fs, []string{"--help"}, nil); !errors.Is(err, ErrHelp) || !strings.Contains(out.String(), "Usage: tauvox fit SERIES\n\nFits a model.") {
		t.Errorf("help: %v %q", err, out.String())
	}
	fs = NewFlags("scan", "", "", &out)
	if err := Parse(fs, []string{"x"}, nil); err == nil || err.Error() != `unexpected argument "x" (see --help)` {
		t.Errorf("positional: %v", err)
	}
}

// TestValues: sizes in powers of 1024, lists, vectors, factors and --force
// in its three forms.
func TestValues(t *testing.T) {
	for in, want := range map[string]int64{"1G": 1 << 30, "512M": 512 << 20, "2GiB": 2 << 30, "1.5g": 3 << 29, "100": 100} {
		var b Bytes
		if err := b.Set(in); err != nil || int64(b) != want {
			t.Errorf("Bytes %q = %d, %v; want %d", in, b, err, want)
		}
	}
	for _, bad := range []string{"lots", "-1G", "0", "2P"} {
		var b Bytes
		if b.Set(bad) == nil {
			t.Errorf("Bytes %q accepted", bad)
		}
	}
	var l List
	if l.List() != nil || l.Set("10:10:40") != nil || len(l.List()) != 4 || l.List()[3] != 40 {
		t.Errorf("List %v", l)
	}
	var v Vec
	if v.Set("1,-2,3.5") != nil || v.V != [3]float64{1, -2, 3.5} || v.Set("1,2") == nil || v.Set("1,NaN,2") == nil {
		t.Errorf("Vec %v", v)
	}
	f := Factors{}
	if f.Set("A4=1.05") != nil || f["A4"] != 1.05 || f.Set("A4=-1") == nil || f.Set("=2") == nil {
		t.Errorf("Factors %v", f)
	}
	var x float64
	if (Finite{V: &x}).Set("NaN") == nil || (Finite{V: &x}).Set("2.5") != nil || x != 2.5 {
		t.Errorf("Finite %v", x)
	}
	var force Force
	if force.Set("true") != nil || !force.On || force.Named != "" {
		t.Errorf("--force: %+v", force)
	}
	if all, err := force.All("out"); all || err != nil {
		t.Errorf("--force All: %v %v", all, err)
	}
	if force.Set("out/") != nil || !force.On {
		t.Errorf("--force=out/: %+v", force)
	}
	if all, err := force.All("out"); !all || err != nil {
		t.Errorf("--force=out/ All(out): %v %v", all, err)
	}
	if _, err := force.All("other"); err == nil || !strings.Contains(err.Error(), "names another folder than the output other") {
		t.Errorf("--force=out/ All(other): %v", err)
	}
}
