package sidecar

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// MaxListLength caps the values ParseList expands, so that a range such
// as 0:0.0001:1e9 fails instead of exhausting memory.
const MaxListLength = 100000

// ParseList parses a list of values given on the command line: numbers
// separated by commas, where an item may also be an inclusive range
// start:step:stop ("10:10:320" is 10, 20, …, 320). Spaces around items are
// ignored. It rejects empty items, text that is not a number, NaN, Inf,
// negative values (times and angles are never negative), a range whose
// step is not positive or whose stop is below its start, and lists longer
// than MaxListLength. Ordering between items is left to the caller. The
// values are returned in the units written (ms for times, degrees for
// angles, by the tauvox convention).
func ParseList(s string) ([]float64, error) {
	if strings.TrimSpace(s) == "" {
		return nil, fmt.Errorf("list %q: empty", s)
	}
	var out []float64
	for n, item := range strings.Split(s, ",") {
		item = strings.TrimSpace(item)
		bad := func(reason string) error {
			return fmt.Errorf("list %q: item %d %q: %s", s, n+1, item, reason)
		}
		if item == "" {
			return nil, bad("empty item")
		}
		parts := strings.Split(item, ":")
		vals := make([]float64, len(parts))
		for i, p := range parts {
			v, err := strconv.ParseFloat(strings.TrimSpace(p), 64)
			if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, bad(fmt.Sprintf("%q is not a finite number", strings.TrimSpace(p)))
			}
			vals[i] = v
		}
		switch len(vals) {
		case 1:
			if vals[0] < 0 {
				return nil, bad("negative value")
			}
			out = append(out, vals[0])
		case 3:
			start, step, stop := vals[0], vals[1], vals[2]
			switch {
			case start < 0 || stop < 0:
				return nil, bad("negative value")
			case !(step > 0):
				return nil, bad("the step of start:step:stop must be positive")
			case stop < start:
				return nil, bad("stop is below start")
			}
			// Count with a relative slack of 1e-9 steps so that 0.1:0.1:0.3
			// includes 0.3 despite rounding.
			cnt := math.Floor((stop-start)/step+1e-9) + 1
			if cnt > MaxListLength || len(out)+int(cnt) > MaxListLength {
				return nil, bad(fmt.Sprintf("expands to more than %d values", MaxListLength))
			}
			for i := 0; i < int(cnt); i++ {
				out = append(out, start+float64(i)*step)
			}
		default:
			return nil, bad("want a number or start:step:stop")
		}
		if len(out) > MaxListLength {
			return nil, fmt.Errorf("list %q: more than %d values", s, MaxListLength)
		}
	}
	return out, nil
}
