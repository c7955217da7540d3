package report

import (
	"bytes"
	"fmt"
	"math"

	"github.com/tauvox/tauvox/roi/history"
)

// Size of a sparkline, in CSS pixels.
const (
	sparkW = 132
	sparkH = 30
)

// sparkline draws a small SVG of one series: its tolerance band (light,
// with edges), the values as a line, a dot for the last value, a triangle
// on sessions flagged by a rule (watch) and a heavy × on sessions outside
// tolerance (action); the shapes tell them apart without colour. Every
// text is our own, nothing from a file goes into it.
func sparkline(s *history.Series) []byte {
	var xs, ys []float64
	var idx []int
	for i, v := range s.Value {
		if finite(v) && !s.Points[i].Time.IsZero() {
			xs = append(xs, float64(s.Points[i].Time.Unix()))
			ys = append(ys, v)
			idx = append(idx, i)
		}
	}
	var b bytes.Buffer
	fmt.Fprintf(&b, `<svg xmlns="http://www.w3.org/2000/svg" width="%d" height="%d" viewBox="0 0 %d %d">`, sparkW, sparkH, sparkW, sparkH)
	if len(xs) == 0 {
		b.WriteString(`</svg>`)
		return b.Bytes()
	}
	tol := lastFinite(s.TolPct, s.TolPct)
	lim := 0.0
	for _, y := range ys {
		lim = math.Max(lim, math.Abs(y))
	}
	if finite(tol) {
		lim = math.Max(lim, tol)
	}
	lim = math.Max(lim*1.15, 1)
	x0, x1 := xs[0], xs[len(xs)-1]
	const pad = 5.0
	px := func(x float64) float64 {
		if x1 == x0 {
			return sparkW / 2
		}
		return pad + (x-x0)/(x1-x0)*(sparkW-2*pad)
	}
	py := func(y float64) float64 { return sparkH/2 - y/lim*(sparkH/2-3) }
	if finite(tol) {
		fmt.Fprintf(&b, `<rect x="0" y="%.1f" width="%d" height="%.1f" fill="#009e73" fill-opacity="0.12"/>`, py(tol), sparkW, py(-tol)-py(tol))
		for _, t := range []float64{tol, -tol} {
			fmt.Fprintf(&b, `<line x1="0" x2="%d" y1="%.1f" y2="%.1f" stroke="#007a5a" stroke-width="0.8"/>`, sparkW, py(t), py(t))
		}
	}
	fmt.Fprintf(&b, `<line x1="0" x2="%d" y1="%.1f" y2="%.1f" stroke="#999" stroke-width="0.6" stroke-dasharray="1.5,1.5"/>`, sparkW, py(0), py(0))
	b.WriteString(`<polyline fill="none" stroke="#0072b2" stroke-width="1.2" points="`)
	for k := range xs {
		fmt.Fprintf(&b, "%.1f,%.1f ", px(xs[k]), py(ys[k]))
	}
	b.WriteString(`"/>`)
	for k, i := range idx {
		x, y := px(xs[k]), py(ys[k])
		switch {
		case at(s.Beyond, i):
			fmt.Fprintf(&b, `<path d="M%.1f %.1fl6 6m0 -6l-6 6" stroke="#d55e00" stroke-width="2"/>`, x-3, y-3)
		case (i < len(s.Rules) && len(s.Rules[i]) > 0) || at(s.EWMAOut, i):
			fmt.Fprintf(&b, `<path d="M%.1f %.1fl3.5 6h-7z" fill="#aa6e00"/>`, x, y-3.5)
		case k == len(xs)-1:
			fmt.Fprintf(&b, `<circle cx="%.1f" cy="%.1f" r="2" fill="#0072b2"/>`, x, y)
		}
	}
	b.WriteString(`</svg>`)
	return b.Bytes()
}
