package report

import (
	"bytes"
	"fmt"
	"image/color"
	"math"
	"sort"
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
	histH      = 5.8 * vg.Inch
	histLegend = 2.6 * vg.Inch // width of the legend column
	histEWMA   = 1.3 * vg.Inch // height of the EWMA panel
	histTemp   = 0.9 * vg.Inch // height of the temperature strip
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
	watchColor   = color.RGBA{170, 110, 0, 255}
	tolColor     = color.RGBA{0, 158, 115, 28}
	tolEdge      = color.RGBA{0, 120, 90, 255}
	baseEndColor = color.RGBA{90, 90, 90, 255}
	tempColor    = color.RGBA{86, 180, 233, 255}
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
// it has no dated finite value. Panels, on one time axis: the control
// chart (tolerance band, centre line and ±2/±3 SD limits of the session
// that was judged, sessions by how they were judged, flags, the drift
// line, the end of the baseline), the EWMA once the baseline is complete,
// and the session temperature.
func historySVG(s *history.Series, set *history.Settings) ([]byte, error) {
	var all, base, loo, fixed, watch, action, unproven plotter.XYs
	var flagX []float64
	var flagText []string
	var sx, sy float64 // centroid of the drift fit's points
	var centre, up2, lo2, up3, lo3, tol plotter.XYs
	var temps plotter.XYs
	baseEnd := math.NaN()
	for i, p := range s.Points {
		v := s.Value[i]
		if p.Time.IsZero() {
			continue
		}
		x := float64(p.Time.Unix())
		if finite(p.Temperature) {
			temps = append(temps, plotter.XY{X: x, Y: p.Temperature})
		}
		if !finite(v) {
			continue
		}
		xy := plotter.XY{X: x, Y: v}
		all = append(all, xy)
		sx, sy = sx+xy.X, sy+xy.Y
		inBase := at(s.InBaseline, i)
		if inBase && s.Complete {
			baseEnd = x
		}
		if c, sd := atF(s.Centre, i), atF(s.SD, i); finite(c) && finite(sd) {
			centre = append(centre, plotter.XY{X: x, Y: c})
			up2, lo2 = append(up2, plotter.XY{X: x, Y: c + 2*sd}), append(lo2, plotter.XY{X: x, Y: c - 2*sd})
			up3, lo3 = append(up3, plotter.XY{X: x, Y: c + 3*sd}), append(lo3, plotter.XY{X: x, Y: c - 3*sd})
		}
		if t := atF(s.TolPct, i); finite(t) {
			tol = append(tol, plotter.XY{X: x, Y: t})
		}
		var rules []int
		if i < len(s.Rules) {
			rules = append(rules, s.Rules[i]...)
		}
		if at(s.EWMAOut, i) {
			rules = append(rules, history.RuleEWMA)
		}
		label := ruleList(rules, ",")
		switch {
		case at(s.Beyond, i):
			action = append(action, xy)
			label = strings.TrimPrefix(label+",tol", ",")
		case len(rules) > 0:
			watch = append(watch, xy)
			if at(s.Outside, i) {
				label += ",tol?"
			}
		case at(s.Outside, i):
			unproven = append(unproven, xy)
			label = "tol?"
		case i < len(s.Mode) && s.Mode[i] == history.ModeFixed:
			fixed = append(fixed, xy)
		case inBase && s.Complete:
			base = append(base, xy)
		default:
			loo = append(loo, xy)
		}
		if label != "" {
			flagX = append(flagX, x)
			flagText = append(flagText, label)
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
		ylabel = "relative to baseline median (%)"
	}
	top := newPlot(title, "", ylabel)
	top.Title.TextStyle.Font.Size = vg.Points(11)
	top.X.Tick.Marker = dateTicks{blank: true}
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
	if len(tol) > 0 {
		// The tolerance band: shaded between −tol and +tol over the
		// whole axis (the median tolerance of the sessions).
		t := medianY(tol)
		band, err := plotter.NewPolygon(plotter.XYs{{X: xmin, Y: -t}, {X: xmax, Y: -t}, {X: xmax, Y: t}, {X: xmin, Y: t}})
		if err != nil {
			return nil, err
		}
		band.Color, band.LineStyle.Width = tolColor, 0
		top.Add(band)
		for _, sign := range []float64{1, -1} {
			l, err := plotter.NewLine(plotter.XYs{{X: xmin, Y: sign * t}, {X: xmax, Y: sign * t}})
			if err != nil {
				return nil, err
			}
			l.Color, l.Width = tolEdge, vg.Points(1.6)
			top.Add(l)
			if sign > 0 {
				leg.Add(fmt.Sprintf("tolerance ±%.1f %%", t), band, l)
			}
		}
		widen(t)
		widen(-t)
	}
	if len(all) > 1 {
		trail, err := plotter.NewLine(all)
		if err != nil {
			return nil, err
		}
		trail.Color, trail.Width = trailColor, vg.Points(0.8)
		top.Add(trail)
	}
	if len(centre) > 0 {
		for _, k := range []struct {
			xy     []plotter.XYs
			name   string
			c      color.RGBA
			dashes []vg.Length
		}{
			{[]plotter.XYs{centre}, "centre line", meanColor, nil},
			{[]plotter.XYs{up2, lo2}, "±2 SD", limit2Color, dash2},
			{[]plotter.XYs{up3, lo3}, fmt.Sprintf("±3 SD (SD ≥ %.2f %%)", s.Floor), limit3Color, dash3},
		} {
			var first *plotter.Line
			for _, xy := range k.xy {
				xy = stretch(xy, xmin, xmax)
				l, err := plotter.NewLine(xy)
				if err != nil {
					return nil, err
				}
				l.Color, l.Width, l.Dashes = k.c, vg.Points(1), k.dashes
				l.StepStyle = plotter.MidStep
				top.Add(l)
				for _, p := range xy {
					widen(p.Y)
				}
				if first == nil {
					first = l
				}
			}
			leg.Add(k.name, first)
		}
	}
	if !s.Relative {
		l, err := hline(xmin, xmax, 0, color.RGBA{0, 0, 0, 255}, 1.3, dashRef)
		if err != nil {
			return nil, err
		}
		top.Add(l)
		widen(0)
		leg.Add("reference (0 % deviation)", l)
	}
	if b := s.Slope; finite(b) {
		atX := func(x float64) float64 { return sy + b*(x-sx)/yearSeconds }
		x0, x1 := all[0].X, all[len(all)-1].X
		l, err := plotter.NewLine(plotter.XYs{{X: x0, Y: atX(x0)}, {X: x1, Y: atX(x1)}})
		if err != nil {
			return nil, err
		}
		l.Color, l.Width = driftColor, vg.Points(1.8)
		if !s.Drifting {
			l.Dashes = dash2
			l.Width = vg.Points(1.2)
		}
		top.Add(l)
		widen(atX(x0))
		widen(atX(x1))
		txt := "drift " + pct(b, 1) + "/yr"
		if finite(s.SlopeLow) && finite(s.SlopeHigh) {
			txt += " [" + strings.TrimSuffix(pct(s.SlopeLow, 1), " %") + ", " + strings.TrimSuffix(pct(s.SlopeHigh, 1), " %") + "]"
		}
		if s.Drifting {
			txt += " rule 6"
		}
		leg.Add(txt, l)
	}
	setRange(top, xmin, xmax, ylo, yhi, 0.22)
	if finite(baseEnd) {
		// The end of the baseline: a vertical line below the label band.
		x := baseEnd + 0.5*(nextX(all, baseEnd)-baseEnd)
		l, err := plotter.NewLine(plotter.XYs{{X: x, Y: top.Y.Min}, {X: x, Y: yhi}})
		if err != nil {
			return nil, err
		}
		l.Color, l.Width, l.Dashes = baseEndColor, vg.Points(1.4), []vg.Length{vg.Points(6), vg.Points(2), vg.Points(1), vg.Points(2)}
		top.Add(l)
		leg.Add(fmt.Sprintf("end of baseline (%d sessions)", s.BaselineN), l)
	}
	for _, g := range []struct {
		xy    plotter.XYs
		name  string
		shape draw.GlyphDrawer
		c     color.RGBA
		r     float64
	}{
		{loo, "session, judged leave-one-out", draw.BoxGlyph{}, sessionColor, 2.4},
		{base, fmt.Sprintf("baseline session (n = %d)", s.BaselineN), draw.RingGlyph{}, sessionColor, 3},
		{fixed, "session, judged on fixed limits", draw.CircleGlyph{}, sessionColor, 2.8},
		{watch, "watch: a rule (label)", draw.PyramidGlyph{}, watchColor, 4.2},
		{unproven, "outside tolerance, within 2u (not proven)", draw.RingGlyph{}, failColor, 4},
		{action, "beyond tolerance by more than 2u", draw.CrossGlyph{}, failColor, 4.6},
	} {
		if len(g.xy) == 0 {
			continue
		}
		sc, err := plotter.NewScatter(g.xy)
		if err != nil {
			return nil, err
		}
		sc.Shape, sc.Color, sc.Radius = g.shape, g.c, vg.Points(g.r)
		if _, ok := g.shape.(draw.CrossGlyph); ok {
			sc.GlyphStyle.Shape = thickCross{}
		}
		top.Add(sc)
		leg.Add(g.name, sc)
	}
	if len(flagText) > 0 {
		// Rule labels in a band above every line, staggered over two rows
		// when neighbours are close, so no label crosses a line or another
		// label.
		lb, err := ruleLabels(flagX, flagText, top.Y.Max, yhi, xmax-xmin)
		if err != nil {
			return nil, err
		}
		top.Add(lb)
	}

	panels := []panel{{p: top, leg: &leg}}
	if ewma {
		bot, legBot, err := ewmaPlot(s, set, xmin, xmax)
		if err != nil {
			return nil, err
		}
		bot.X.Tick.Marker = dateTicks{blank: true}
		bot.X.Label.Text = ""
		panels = append(panels, panel{p: bot, leg: &legBot, h: histEWMA})
	}
	tp, tleg, err := tempPlot(temps, xmin, xmax)
	if err != nil {
		return nil, err
	}
	panels = append(panels, panel{p: tp, leg: &tleg, h: histTemp})
	return drawChart(panels)
}

// panel is one plot of a chart, its legend and its height (0: the rest).
type panel struct {
	p   *plot.Plot
	leg *plot.Legend
	h   vg.Length
}

func at(b []bool, i int) bool { return i < len(b) && b[i] }

func atF(v []float64, i int) float64 {
	if i < len(v) {
		return v[i]
	}
	return math.NaN()
}

func medianY(xy plotter.XYs) float64 {
	v := make([]float64, len(xy))
	for i, p := range xy {
		v[i] = p.Y
	}
	sort.Float64s(v)
	return v[len(v)/2]
}

// nextX is the x of the point after x, or x plus a month at the end.
func nextX(all plotter.XYs, x float64) float64 {
	for _, p := range all {
		if p.X > x {
			return p.X
		}
	}
	return x + 30*86400
}

// stretch extends a per-session line by half a gap at both ends (to the
// axis ends for a single point), so step lines cover their sessions.
func stretch(xy plotter.XYs, xmin, xmax float64) plotter.XYs {
	out := make(plotter.XYs, 0, len(xy)+2)
	out = append(out, plotter.XY{X: xmin, Y: xy[0].Y})
	out = append(out, xy...)
	return append(out, plotter.XY{X: xmax, Y: xy[len(xy)-1].Y})
}

func hline(xmin, xmax, y float64, c color.RGBA, w float64, dashes []vg.Length) (*plotter.Line, error) {
	l, err := plotter.NewLine(plotter.XYs{{X: xmin, Y: y}, {X: xmax, Y: y}})
	if err != nil {
		return nil, err
	}
	l.Color, l.Width, l.Dashes = c, vg.Points(w), dashes
	return l, nil
}

// ruleLabels places the labels in the band between yhi (above every line)
// and ytop, in up to three rows: each label goes to the first row whose
// last label is at least a label's width away, or, when none is, to the
// row whose last label is farthest.
func ruleLabels(xs []float64, text []string, ytop, yhi, span float64) (*plotter.Labels, error) {
	rows := [3]float64{yhi + 0.2*(ytop-yhi), yhi + 0.5*(ytop-yhi), yhi + 0.8*(ytop-yhi)}
	var xy plotter.XYs
	last := [3]float64{math.Inf(-1), math.Inf(-1), math.Inf(-1)}
	// A label of 4 characters at 8 pt is about 0.048 of the data area's
	// width (about 6 in).
	minGap := 0.048 * span
	for i, x := range xs {
		w := minGap * math.Max(1, float64(len(text[i]))/4)
		row := -1
		for r := range rows {
			if x-last[r] >= w {
				row = r
				break
			}
		}
		if row < 0 {
			row = 0
			for r := range rows {
				if last[r] < last[row] {
					row = r
				}
			}
		}
		last[row] = x
		xy = append(xy, plotter.XY{X: x, Y: rows[row]})
	}
	lb, err := plotter.NewLabels(plotter.XYLabels{XYs: xy, Labels: text})
	if err != nil {
		return nil, err
	}
	for i := range lb.TextStyle {
		lb.TextStyle[i].Font.Typeface, lb.TextStyle[i].Font.Variant = sans.Typeface, sans.Variant
		lb.TextStyle[i].Font.Size = vg.Points(8)
		lb.TextStyle[i].Color = watchColor
		lb.TextStyle[i].XAlign, lb.TextStyle[i].YAlign = draw.XCenter, draw.YCenter
	}
	return lb, nil
}

// tempPlot draws the session temperatures.
func tempPlot(temps plotter.XYs, xmin, xmax float64) (*plot.Plot, plot.Legend, error) {
	p := newPlot("", "session date", "°C")
	p.X.Tick.Marker = dateTicks{}
	leg := chartLegend()
	ylo, yhi := math.Inf(1), math.Inf(-1)
	for _, t := range temps {
		ylo, yhi = math.Min(ylo, t.Y), math.Max(yhi, t.Y)
	}
	if len(temps) > 0 {
		if err := addTrace(p, &leg, temps, tempColor, 1, fmt.Sprintf("session temperature (%.1f–%.1f °C)", ylo, yhi)); err != nil {
			return nil, leg, err
		}
	}
	setRange(p, xmin, xmax, ylo, yhi, 0.08)
	return p, leg, nil
}

// addTrace draws xy as a line with small dots and names it in leg.
func addTrace(p *plot.Plot, leg *plot.Legend, xy plotter.XYs, c color.RGBA, width float64, name string) error {
	l, sc, err := plotter.NewLinePoints(xy)
	if err != nil {
		return err
	}
	l.Color, l.Width = c, vg.Points(width)
	sc.Color, sc.Shape, sc.Radius = c, draw.CircleGlyph{}, vg.Points(1.8)
	p.Add(l, sc)
	leg.Add(name, l, sc)
	return nil
}

// thickCross is an × drawn with heavier lines, readable in greyscale.
type thickCross struct{}

func (thickCross) DrawGlyph(c *draw.Canvas, sty draw.GlyphStyle, pt vg.Point) {
	c.SetLineStyle(draw.LineStyle{Color: sty.Color, Width: vg.Points(1.8)})
	r := sty.Radius
	var p vg.Path
	p.Move(vg.Point{X: pt.X - r, Y: pt.Y - r})
	p.Line(vg.Point{X: pt.X + r, Y: pt.Y + r})
	p.Move(vg.Point{X: pt.X - r, Y: pt.Y + r})
	p.Line(vg.Point{X: pt.X + r, Y: pt.Y - r})
	c.Stroke(p)
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
	if err := addTrace(p, &leg, z, sessionColor, 1.2, fmt.Sprintf("EWMA, λ = %g", lam)); err != nil {
		return nil, leg, err
	}
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

// drawChart lays out the panels top to bottom with their data areas
// aligned, the legends beside them, and returns the SVG.
func drawChart(panels []panel) ([]byte, error) {
	c := vgsvg.New(histW, histH)
	dc := draw.New(c)
	area := dc
	area.Max.X -= histLegend
	legX := area.Max.X + vg.Points(10)
	cs := make([]draw.Canvas, len(panels))
	y := area.Min.Y
	for i := len(panels) - 1; i >= 0; i-- {
		cs[i] = area
		cs[i].Min.Y = y
		if panels[i].h > 0 {
			cs[i].Max.Y = y + panels[i].h
			y += panels[i].h
		}
	}
	// Align the data areas: the panels' y labels differ in width.
	for range 2 {
		left, right := vg.Length(math.Inf(-1)), vg.Length(math.Inf(1))
		for i, p := range panels {
			d := p.p.DataCanvas(cs[i])
			left, right = max(left, d.Min.X), min(right, d.Max.X)
		}
		for i, p := range panels {
			d := p.p.DataCanvas(cs[i])
			cs[i].Min.X += left - d.Min.X
			cs[i].Max.X -= d.Max.X - right
		}
	}
	for i, p := range panels {
		p.p.Draw(cs[i])
		drawLegend(dc, p.leg, legX, p.p.DataCanvas(cs[i]).Max.Y)
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
