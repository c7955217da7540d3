package qarun

import (
	"math"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/roi/history"
)

// TestChartOptions: the chart flags are checked and carried into the
// statistics settings (percent → fraction, months → years).
func TestChartOptions(t *testing.T) {
	ok := ChartOptions{Baseline: 12, MinSessions: 5, MinLimit: 3, Horizon: 12, MinDrift: 1}
	for _, c := range []struct {
		name  string
		edit  func(*ChartOptions)
		err   string  // a phrase of the error, "" for none
		level float64 // DriftLevel of the settings
	}{
		{"defaults", func(*ChartOptions) {}, "", history.DefaultDriftConfidence},
		{"95 %", func(o *ChartOptions) { o.DriftConfidence = 95 }, "", 0.95},
		{"99.99 %", func(o *ChartOptions) { o.DriftConfidence = 99.99 }, "", 0.9999},
		{"100 %", func(o *ChartOptions) { o.DriftConfidence = 100 }, "--drift-confidence", 0},
		{"as a fraction", func(o *ChartOptions) { o.DriftConfidence = 0.95 }, "--drift-confidence", 0},
		{"baseline 1", func(o *ChartOptions) { o.Baseline = 1 }, "--baseline", 0},
		{"horizon 0", func(o *ChartOptions) { o.Horizon = 0 }, "--horizon", 0},
	} {
		o := ok
		c.edit(&o)
		set, err := o.Settings()
		switch {
		case c.err != "":
			if err == nil || !strings.Contains(err.Error(), c.err) {
				t.Errorf("%s: error %v, want one naming %s", c.name, err, c.err)
			}
		case err != nil:
			t.Errorf("%s: %v", c.name, err)
		case math.Abs(set.DriftLevel()-c.level) > 1e-12 || set.Horizon != 1:
			t.Errorf("%s: drift level %g horizon %g years, want %g and 1", c.name, set.DriftLevel(), set.Horizon, c.level)
		}
	}
}
