package cli

import (
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/tauvox/tauvox/io/sidecar"
)

// List is a flag holding a list of numbers ("10,20,30" or "10:10:160",
// sidecar.ParseList).
type List struct {
	Vals  []float64
	IsSet bool
}

func (l *List) String() string { return "" }

// Set parses the list.
func (l *List) Set(s string) error {
	v, err := sidecar.ParseList(s)
	if err != nil {
		return err
	}
	l.Vals, l.IsSet = v, true
	return nil
}

// List returns the values, nil when the flag was not given.
func (l *List) List() []float64 {
	if !l.IsSet {
		return nil
	}
	return l.Vals
}

// Bytes is a size in bytes, given as a number with an optional K, M, G or
// T suffix (powers of 1024; "GiB", "GB" and "G" alike).
type Bytes int64

func (b *Bytes) String() string { return strconv.FormatInt(int64(*b), 10) }

// Set parses the size.
func (b *Bytes) Set(s string) error {
	t := strings.ToUpper(strings.TrimSpace(s))
	t = strings.TrimSuffix(strings.TrimSuffix(t, "B"), "I")
	mult := int64(1)
	if n := len(t); n > 0 {
		switch t[n-1] {
		case 'K':
			mult = 1 << 10
		case 'M':
			mult = 1 << 20
		case 'G':
			mult = 1 << 30
		case 'T':
			mult = 1 << 40
		}
		if mult > 1 {
			t = t[:n-1]
		}
	}
	v, err := strconv.ParseFloat(strings.TrimSpace(t), 64)
	if err != nil || !(v > 0) || v*float64(mult) > 1<<50 {
		return fmt.Errorf("%q is not a size such as 512M or 2G", s)
	}
	*b = Bytes(v * float64(mult))
	return nil
}

// Finite is a float flag that refuses NaN and infinities.
type Finite struct{ V *float64 }

func (o Finite) String() string { return "" }

// Set parses the number.
func (o Finite) Set(s string) error {
	var v float64
	if _, err := fmt.Sscanf(s, "%g", &v); err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Errorf("want a number")
	}
	*o.V = v
	return nil
}

// Vec parses "x,y,z".
type Vec struct{ V [3]float64 }

func (f *Vec) String() string { return "" }

// Set parses the three numbers.
func (f *Vec) Set(s string) error {
	parts := strings.Split(s, ",")
	if len(parts) != 3 {
		return fmt.Errorf("want three numbers x,y,z")
	}
	for i, p := range parts {
		v, err := strconv.ParseFloat(strings.TrimSpace(p), 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("want three numbers x,y,z")
		}
		f.V[i] = v
	}
	return nil
}

// Factors parses repeatable NAME=FACTOR pairs (a positive factor).
type Factors map[string]float64

func (d Factors) String() string { return "" }

// Set parses one pair.
func (d Factors) Set(s string) error {
	id, f, ok := strings.Cut(s, "=")
	v, err := strconv.ParseFloat(f, 64)
	if !ok || err != nil || !(v > 0) || math.IsInf(v, 0) || id == "" {
		return fmt.Errorf("want VIAL=FACTOR, e.g. A4=1.05")
	}
	d[id] = v
	return nil
}

// Multi collects a repeatable flag whose values may also be
// comma-separated lists.
type Multi []string

func (m *Multi) String() string { return strings.Join(*m, ",") }

// Set adds the values.
func (m *Multi) Set(s string) error {
	for _, v := range strings.Split(s, ",") {
		if v = strings.TrimSpace(v); v != "" {
			*m = append(*m, v)
		}
	}
	return nil
}

// Repeat collects a repeatable flag whose value may hold commas.
type Repeat []string

func (r *Repeat) String() string { return strings.Join(*r, " ") }

// Set adds the value.
func (r *Repeat) Set(s string) error {
	*r = append(*r, s)
	return nil
}

// ForceUsage describes the --force flag of the commands that write a
// folder.
const ForceUsage = "replace an existing output folder that holds only what tauvox wrote there; --force=DIR (the folder again) replaces it whatever it holds"

// Force is --force (replace an output folder holding only what tauvox
// wrote there) or --force=DIR (replace the folder DIR, named again by the
// user, whatever it holds).
type Force struct {
	On    bool
	Named string
}

// IsBoolFlag lets --force stand alone.
func (f *Force) IsBoolFlag() bool { return true }
func (f *Force) String() string {
	if f == nil || !f.On {
		return "false"
	}
	if f.Named != "" {
		return f.Named
	}
	return "true"
}

// Set takes a boolean or the folder's name.
func (f *Force) Set(s string) error {
	if b, err := strconv.ParseBool(s); err == nil {
		f.On, f.Named = b, ""
		return nil
	}
	if strings.TrimSpace(s) == "" {
		return errors.New("--force=DIR needs the folder")
	}
	f.On, f.Named = true, s
	return nil
}

// All reports whether --force=DIR names the output folder out (replace it
// whatever it holds); a name of another folder is an error.
func (f Force) All(out string) (bool, error) {
	if f.Named == "" {
		return false, nil
	}
	if filepath.Clean(f.Named) != filepath.Clean(out) {
		return false, fmt.Errorf("--force=%s names another folder than the output %s", f.Named, out)
	}
	return true, nil
}
