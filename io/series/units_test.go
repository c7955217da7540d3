package series

import (
	"strings"
	"testing"
)

// TestCheckUnits: command-line lists in the wrong unit are refused with a
// line naming the unit tauvox takes and the probable meaning; lists in the
// right unit pass, including an ultrashort first echo beside later ones
// and the smallest flip angles of a variable-flip-angle series. The limits
// are common practice (see CheckUnits).
func TestCheckUnits(t *testing.T) {
	bad := []struct {
		flag string
		vals []float64
		want string
	}{
		{"te", []float64{0.01, 0.02, 0.03}, "--te 0.01,0.02,0.03: tauvox takes echo times in ms and every value is below 0.5 ms, as times in seconds would be: was --te 10,20,30 (ms) meant?"},
		{"te", []float64{0.003, 0.006, 0.009, 0.012, 0.015, 0.018, 0.021}, "was --te 3,6,9,…,21 (ms) meant?"},
		{"te", []float64{0.012}, "was --te 12 (ms) meant?"},
		{"ti", []float64{0.05, 0.1, 0.2, 0.4, 3.2}, "--ti 0.05,0.1,0.2,0.4,3.2: tauvox takes inversion times in ms and 0.05 ms is shorter than an inversion pulse lasts, as times in seconds would be: was --ti 50,100,200,400,3200 (ms) meant?"},
		{"tr", []float64{0.015}, "--tr 0.015: tauvox takes repetition times in ms and 0.015 ms is shorter than an excitation lasts"},
		{"fa", []float64{270}, "--fa 270: tauvox takes flip angles in degrees, and 270° is above 180°"},
		{"fa", []float64{0.0349066, 0.261799, 0.523599}, "--fa 0.0349066,0.261799,0.523599: tauvox takes flip angles in degrees and these look like radians: was --fa 2,15,30 meant?"},
	}
	for _, c := range bad {
		err := CheckUnits(c.flag, c.vals)
		if err == nil || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("--%s %v: %v, want a line containing %q", c.flag, c.vals, err, c.want)
		}
	}
	good := []struct {
		flag string
		vals []float64
	}{
		{"te", []float64{10, 20, 30}},
		{"te", []float64{0.07, 0.5, 1.2, 2.4}}, // ultrashort first echo
		{"te", []float64{0.6}},
		{"ti", []float64{0, 50, 3200}}, // TI 0: no inversion delay
		{"ti", []float64{1, 2}},
		{"tr", []float64{1.5, 15, 8000}},
		{"fa", []float64{2, 3, 5, 10, 15, 20, 30}}, // VFA
		{"fa", []float64{1, 2, 3}},
		{"fa", []float64{90}},
		{"fa", []float64{180}},
		{"fa", nil},
	}
	for _, c := range good {
		if err := CheckUnits(c.flag, c.vals); err != nil {
			t.Errorf("--%s %v refused: %v", c.flag, c.vals, err)
		}
	}
}
