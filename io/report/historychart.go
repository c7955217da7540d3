package report

import (
	"bytes"
	"fmt"
	"image/color"
	"math"
	"strings"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"

	"github.com/tauvox/tauvox/roi/history"
)

// Geometry of a stability chart: the control chart on top, the EWMA panel
// below it on the same time axis, the legends in a column on the right.
const (
	histW      = 8.6 * vg.Inch
	histH      = 4.9 * vg.Inch
	histLegend = 2.6 * vg.Inch // width of the legend column
	histEWMA   = 1.5 * vg.Inch // height of the EWMA panel
	histTitle  = 28            // characters of each name in the title
)

// Colours of the stability charts, from the Okabe–Ito palette (as the
// verdict colours in figures.go): blue for sessions, vermillion for
// flagged ones (also drawn as triangles, so the flag does not rest on
// colour alone), reddish purple for the drift line; limits in greys told
// apart by their dash pattern.
var (
	sessionColor = color.RGBA{0, 114, 178, 255}
	driftColor   = color.RGBA{204, 121, 167, 255}
	meanColor    = color.RGBA{60, 60, 60, 255}
	limit2Color  = color.RGBA{120, 120, 120, 255}
	limit3Color  = color.RGBA{50, 50, 50, 255}
	trailColor   = color.RGBA{190, 200, 210, 255}
	gridColor    = color.RGBA{232, 232, 232, 255}
)

// Dash patterns: ±2 SD dashed, ±3 SD dash-dot, the reference dotted.
var (
	dash2   = []vg.Length{vg.Points(4), vg.Points(3)}
	dash3   = []vg.Length{vg.Points(9), vg.Points(3), vg.Points(2), vg.Points(3)}
	dashRef = []vg.Length{vg.Points(1.2), vg.Points(2)}
)

// yearSeconds is a mean Gregorian year in seconds, the unit history uses
// for slopes.
const yearSeconds = 365.2425 * 24 * 3600

// historySVG draws the stability chart of one series, or returns nil when
// it has no dated finite value.
func historySVG(s *history.Series, set *history.Settings) ([]byte, error) {
	var all, base, mon, flag plotter.XYs
	var flagText []string
	var sx, sy float64 // centroid of the drift fit's points
	for i, p := range s.Points {
		v := s.Value[i]
		if !finite(v) || p.Time.IsZero() {
			continue
		}
		xy := plotter.XY{X: float64(p.Time.Unix()), Y: v}
		all = append(all, xy)
		sx, sy = sx+xy.X, sy+xy.Y
		inBase := i < len(s.InBaseline) && s.InBaseline[i]
		var rules []int
		if i < len(s.Rules) {
			rules = append(rules, s.Rules[i]...)
		}
		if !inBase && i < len(s.EWMAOut) && s.EWMAOut[i] {
			rules = append(rules, history.RuleEWMA)
		}
		switch {
		case len(rules) > 0:
			flag = append(flag, xy)
			flagText = append(flagText, ruleList(rules, ","))
		case inBase:
			base = append(base, xy)
		default:
			mon = append(mon, xy)
		}
	}
	if len(all) == 0 {
		return nil, nil
	}
	sx, sy = sx/float64(len(all)), sy/float64(len(all))
	xmin, xmax := all[0].X, all[len(all)-1].X
	for _, p := range all {
		xmin, xmax = math.Min(xmin, p.X), math.Max(xmax, p.X)
	}
	span := xmax - xmin
	if span < 30*86400 {
		mid := (xmin + xmax) / 2
		xmin, xmax, span = mid-15*86400, mid+15*86400, 30*86400
	}
	xmin, xmax = xmin-0.04*span, xmax+0.04*span

	ewma := hasEWMA(s)
	title := display(s.Scanner, histTitle) + " · " + display(s.Vial, histTitle) + " · " + display(s.Quantity, histTitle)
	ylabel := "deviation from reference (%)"
	if s.Relative {
		ylabel = "relative to baseline mean (%)"
	}
	top := newPlot(title, "session date", ylabel)
	top.Title.TextStyle.Font.Size = vg.Points(11)
	top.X.Tick.Marker = dateTicks{}
	if ewma {
		top.X.Label.Text = ""
		top.X.Tick.Marker = dateTicks{blank: true}
	}
	grid := plotter.NewGrid()
	grid.Vertical.Color, grid.Horizontal.Color = gridColor, gridColor
	top.Add(grid)
	leg := chartLegend()

	ylo, yhi := math.Inf(1), math.Inf(-1)
	widen := func(v float64) {
		if finite(v) {
			ylo, yhi = math.Min(ylo, v), math.Max(yhi, v)
		}
	}
	for _, p := range all {
		widen(p.Y)
	}
	hline := func(y float64, c color.RGBA, w float64, dashes []vg.Length) (*plotter.Line, error) {
		l, err := plotter.NewLine(plotter.XYs{{X: xmin, Y: y}, {X: xmax, Y: y}})
		if err != nil {
			return nil, err
		}
		l.Color, l.Width, l.Dashes = c, vg.Points(w), dashes
		return l, nil
	}

	if len(all) > 1 {
		trail, err := plotter.NewLine(all)
		if err != nil {
			return nil, err
		}
		trail.Color, trail.Width = trailColor, vg.Points(0.8)
		top.Add(trail)
	}
	if m, sd := s.BaselineMean, s.BaselineSD; finite(m) {
		l, err := hline(m, meanColor, 1, nil)
		if err != nil {
			return nil, err
		}
		top.Add(l)
		leg.Add("baseline mean "+pct(m, 2), l)
		if finite(sd) && sd > 0 {
			for _, k := range []struct {
				n      float64
				c      color.RGBA
				dashes []vg.Length
			}{{2, limit2Color, dash2}, {3, limit3Color, dash3}} {
				var first *plotter.Line
				for _, sign := range []float64{1, -1} {
					l, err := hline(m+sign*k.n*sd, k.c, 1, k.dashes)
					if err != nil {
						return nil, err
					}
					top.Add(l)
					widen(m + sign*k.n*sd)
					first = l
				}
				leg.Add(fmt.Sprintf("±%g SD (±%.2f)", k.n, k.n*sd), first)
			}
		}
	}
	if !s.Relative {
		l, err := hline(0, color.RGBA{0, 0, 0, 255}, 1.3, dashRef)
		if err != nil {
			return nil, err
		}
		top.Add(l)
		widen(0)
		leg.Add("reference (0 % deviation)", l)
	}
	if b := s.Slope; finite(b) {
		at := func(x float64) float64 { return sy + b*(x-sx)/yearSeconds }
		x0, x1 := all[0].X, all[len(all)-1].X
		l, err := plotter.NewLine(plotter.XYs{{X: x0, Y: at(x0)}, {X: x1, Y: at(x1)}})
		if err != nil {
			return nil, err
		}
		l.Color, l.Width = driftColor, vg.Points(1.8)
		top.Add(l)
		widen(at(x0))
		widen(at(x1))
		txt := "drift " + pct(b, 1) + "/yr"
		if finite(s.SlopeLow) && finite(s.SlopeHigh) {
			txt += " [" + strings.TrimSuffix(pct(s.SlopeLow, 1), " %") + ", " + strings.TrimSuffix(pct(s.SlopeHigh, 1), " %") + "]"
		}
		if s.Drifting {
			txt += " rule 6"
		}
		leg.Add(txt, l)
	}
	for _, g := range []struct {
		xy    plotter.XYs
		name  string
		shape draw.GlyphDrawer
		c     color.RGBA
		r     float64
	}{
		{base, fmt.Sprintf("baseline session (n = %d)", s.BaselineN), draw.RingGlyph{}, sessionColor, 3},
		{mon, "session", draw.CircleGlyph{}, sessionColor, 2.8},
		{flag, "flagged; label: rules", draw.PyramidGlyph{}, failColor, 4.2},
	} {
		if len(g.xy) == 0 {
			continue
		}
		sc, err := plotter.NewScatter(g.xy)
		if err != nil {
			return nil, err
		}
		sc.Shape, sc.Color, sc.Radius = g.shape, g.c, vg.Points(g.r)
		top.Add(sc)
		leg.Add(g.name, sc)
	}
	if len(flag) > 0 {
		lb, err := plotter.NewLabels(plotter.XYLabels{XYs: flag, Labels: flagText})
		if err != nil {
			return nil, err
		}
		for i := range lb.TextStyle {
			lb.TextStyle[i].Font.Typeface, lb.TextStyle[i].Font.Variant = sans.Typeface, sans.Variant
			lb.TextStyle[i].Font.Size = vg.Points(8)
			lb.TextStyle[i].Color = failColor
			// Upright labels, reading upwards from just above the
			// point, so those of neighbouring sessions do not overlap.
			lb.TextStyle[i].Rotation = math.Pi / 2
			lb.TextStyle[i].XAlign, lb.TextStyle[i].YAlign = draw.XLeft, draw.YCenter
		}
		lb.Offset = vg.Point{Y: vg.Points(6)}
		top.Add(lb)
	}
	setRange(top, xmin, xmax, ylo, yhi, 0.14)

	var bot *plot.Plot
	var legBot plot.Legend
	if ewma {
		var err error
		bot, legBot, err = ewmaPlot(s, set, xmin, xmax)
		if err != nil {
			return nil, err
		}
	}
	return drawChart(top, bot, &leg, &legBot)
}

func hasEWMA(s *history.Series) bool {
	for _, z := range s.EWMA {
		if finite(z) {
			return true
		}
	}
	return false
}

// ewmaPlot draws the EWMA statistic, its centre line and limits, and the
// points beyond the limits after the baseline (rule 5).
func ewmaPlot(s *history.Series, set *history.Settings, xmin, xmax float64) (*plot.Plot, plot.Legend, error) {
	lam := 0.2
	if set != nil && set.Lambda != 0 {
		lam = set.Lambda
	}
	p := newPlot("", "session date", "EWMA (%)")
	p.X.Tick.Marker = dateTicks{}
	grid := plotter.NewGrid()
	grid.Vertical.Color, grid.Horizontal.Color = gridColor, gridColor
	p.Add(grid)
	leg := chartLegend()
	var z, lo, hi, out plotter.XYs
	ylo, yhi := math.Inf(1), math.Inf(-1)
	for i, pt := range s.Points {
		if pt.Time.IsZero() || !finite(s.EWMA[i]) {
			continue
		}
		x := float64(pt.Time.Unix())
		z = append(z, plotter.XY{X: x, Y: s.EWMA[i]})
		for _, v := range []float64{s.EWMA[i], s.EWMALow[i], s.EWMAHigh[i]} {
			if finite(v) {
				ylo, yhi = math.Min(ylo, v), math.Max(yhi, v)
			}
		}
		if finite(s.EWMALow[i]) && finite(s.EWMAHigh[i]) {
			lo = append(lo, plotter.XY{X: x, Y: s.EWMALow[i]})
			hi = append(hi, plotter.XY{X: x, Y: s.EWMAHigh[i]})
		}
		if s.EWMAOut[i] && !(i < len(s.InBaseline) && s.InBaseline[i]) {
			out = append(out, plotter.XY{X: x, Y: s.EWMA[i]})
		}
	}
	if m := s.BaselineMean; finite(m) {
		l, err := plotter.NewLine(plotter.XYs{{X: xmin, Y: m}, {X: xmax, Y: m}})
		if err != nil {
			return nil, leg, err
		}
		l.Color, l.Width = meanColor, vg.Points(1)
		p.Add(l)
	}
	var limits *plotter.Line
	for _, xy := range []plotter.XYs{lo, hi} {
		if len(xy) < 2 {
			continue
		}
		l, err := plotter.NewLine(xy)
		if err != nil {
			return nil, leg, err
		}
		l.Color, l.Width, l.Dashes = limit3Color, vg.Points(1), dash2
		p.Add(l)
		limits = l
	}
	zl, zs, err := plotter.NewLinePoints(z)
	if err != nil {
		return nil, leg, err
	}
	zl.Color, zl.Width = sessionColor, vg.Points(1.2)
	zs.Color, zs.Shape, zs.Radius = sessionColor, draw.CircleGlyph{}, vg.Points(1.8)
	p.Add(zl, zs)
	leg.Add(fmt.Sprintf("EWMA, λ = %g", lam), zl, zs)
	if limits != nil {
		leg.Add("EWMA limits", limits)
	}
	if len(out) > 0 {
		sc, err := plotter.NewScatter(out)
		if err != nil {
			return nil, leg, err
		}
		sc.Color, sc.Shape, sc.Radius = failColor, draw.PyramidGlyph{}, vg.Points(4)
		p.Add(sc)
		leg.Add("beyond the limits (rule 5)", sc)
	}
	setRange(p, xmin, xmax, ylo, yhi, 0.08)
	return p, leg, nil
}

func chartLegend() plot.Legend {
	l := plot.NewLegend()
	l.TextStyle.Font.Typeface, l.TextStyle.Font.Variant = sans.Typeface, sans.Variant
	l.TextStyle.Font.Size = vg.Points(8.5)
	l.Top, l.Left = true, true
	l.ThumbnailWidth = vg.Points(22)
	l.Padding = vg.Points(2)
	return l
}

// setRange fixes the axes: x as given, y the data range padded by 8 %
// below and by top above (room for the flag labels), at least ±0.5
// around a flat series.
func setRange(p *plot.Plot, xmin, xmax, ylo, yhi, top float64) {
	if !finite(ylo) || !finite(yhi) {
		ylo, yhi = -1, 1
	}
	if yhi-ylo < 1 {
		mid := (ylo + yhi) / 2
		ylo, yhi = mid-0.5, mid+0.5
	}
	r := yhi - ylo
	p.X.Min, p.X.Max = xmin, xmax
	p.Y.Min, p.Y.Max = ylo-0.08*r, yhi+top*r
}

// drawChart lays out the control chart (and the EWMA panel under it, when
// bot is not nil) with their data areas aligned, the legends beside them,
// and returns the SVG.
func drawChart(top, bot *plot.Plot, legTop, legBot *plot.Legend) ([]byte, error) {
	c := vgsvg.New(histW, histH)
	dc := draw.New(c)
	area := dc
	area.Max.X -= histLegend
	legX := area.Max.X + vg.Points(10)
	topC := area
	if bot == nil {
		top.Draw(topC)
		drawLegend(dc, legTop, legX, top.DataCanvas(topC).Max.Y)
	} else {
		botC := area
		topC.Min.Y += histEWMA
		botC.Max.Y = histEWMA
		// Align the data areas: the panels' y labels differ in width.
		for range 2 {
			dt, db := top.DataCanvas(topC), bot.DataCanvas(botC)
			if d := dt.Min.X - db.Min.X; d > 0 {
				botC.Min.X += d
			} else {
				topC.Min.X -= d
			}
			dt, db = top.DataCanvas(topC), bot.DataCanvas(botC)
			if d := dt.Max.X - db.Max.X; d > 0 {
				topC.Max.X -= d
			} else {
				botC.Max.X += d
			}
		}
		top.Draw(topC)
		bot.Draw(botC)
		drawLegend(dc, legTop, legX, top.DataCanvas(topC).Max.Y)
		drawLegend(dc, legBot, legX, bot.DataCanvas(botC).Max.Y)
	}
	var buf bytes.Buffer
	if _, err := c.WriteTo(&buf); err != nil {
		return nil, fmt.Errorf("report: plot: %w", err)
	}
	return buf.Bytes(), nil
}

func drawLegend(dc draw.Canvas, l *plot.Legend, x, top vg.Length) {
	c := dc
	c.Min.X, c.Max.Y = x, top
	l.Draw(c)
}

// pct formats a percentage with dec decimals, a sign (U+2212 for minus)
// and " %".
func pct(v float64, dec int) string {
	s := fmt.Sprintf("%+.*f", dec, v)
	if strings.Trim(s, "-+0.") == "" {
		s = strings.Replace(s, "-", "+", 1)
	}
	return strings.Replace(s, "-", "−", 1) + " %"
}

// dateTicks marks a time axis in Unix seconds at calendar boundaries:
// days, weeks, months, quarters or years, whichever gives at most about
// eight labels. With blank set the labels are left out (a panel above
// another on the same axis).
type dateTicks struct{ blank bool }

var _ plot.Ticker = dateTicks{}

func (d dateTicks) Ticks(min, max float64) []plot.Tick {
	if !(max > min) || math.IsInf(min, 0) || math.IsInf(max, 0) {
		return nil
	}
	t0 := time.Unix(int64(math.Floor(min)), 0).UTC()
	t1 := time.Unix(int64(math.Ceil(max)), 0).UTC()
	days := t1.Sub(t0).Hours() / 24
	var ticks []plot.Tick
	add := func(t time.Time, label string) {
		x := float64(t.Unix())
		if x < min || x > max {
			return
		}
		if d.blank && label != "" {
			label = " " // keeps the major tick length; no text
		}
		ticks = append(ticks, plot.Tick{Value: x, Label: label})
	}
	if days <= 100 {
		step := 1
		for _, s := range []int{1, 2, 7, 14, 28} {
			step = s
			if days/float64(s) <= 7 {
				break
			}
		}
		day := time.Date(t0.Year(), t0.Month(), t0.Day(), 0, 0, 0, 0, time.UTC)
		// Weekly steps label Mondays (ISO 8601 weeks start on Monday).
		k := 0
		if step%7 == 0 {
			k = (int(day.Weekday()) + 6) % 7
		}
		for ; !day.After(t1); k++ {
			if k%step == 0 {
				add(day, day.Format("2006-01-02"))
			} else {
				add(day, "")
			}
			day = day.AddDate(0, 0, 1)
		}
		return ticks
	}
	months := days / 30.44
	step := 1
	for _, s := range []int{1, 2, 3, 6, 12, 24, 60, 120, 240} {
		step = s
		if months/float64(s) <= 8 {
			break
		}
	}
	minor := 1
	switch {
	case step >= 24:
		minor = 12
	case step == 12:
		minor = 3
	}
	layout := "2006-01"
	if step >= 12 {
		layout = "2006"
	}
	m := time.Date(t0.Year(), t0.Month(), 1, 0, 0, 0, 0, time.UTC)
	for !m.After(t1) {
		idx := m.Year()*12 + int(m.Month()) - 1
		switch {
		case idx%step == 0:
			add(m, m.Format(layout))
		case idx%minor == 0:
			add(m, "")
		}
		m = m.AddDate(0, 1, 0)
	}
	return ticks
}
