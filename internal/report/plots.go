package report

import (
	"bytes"
	"fmt"
	"image/color"
	"math"
	"sort"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"github.com/tauvox/tauvox/roi/phantom"
)

// Plots are drawn with gonum.org/v1/plot (log axes, legends, SVG output)
// and embedded as SVG images.

const (
	plotW = 5.2 * vg.Inch
	plotH = 4 * vg.Inch
)

var sans = font.Font{Typeface: "Liberation", Variant: "Sans"}

// newPlot returns a plot whose texts use the sans-serif Liberation face.
func newPlot(title, xl, yl string) *plot.Plot {
	p := plot.New()
	p.Title.Text, p.X.Label.Text, p.Y.Label.Text = title, xl, yl
	for _, s := range []*text.Style{&p.Title.TextStyle, &p.X.Label.TextStyle, &p.Y.Label.TextStyle, &p.X.Tick.Label, &p.Y.Tick.Label, &p.Legend.TextStyle} {
		s.Font.Typeface, s.Font.Variant = sans.Typeface, sans.Variant
	}
	p.Title.TextStyle.Font.Size = vg.Points(12)
	return p
}

// usable reports whether r can be placed on a log–log plot.
func usable(r *phantom.VialQA) bool {
	return r.Reference > 0 && r.Median > 0 && !math.IsInf(r.Median, 0) && !math.IsInf(r.Reference, 0)
}

// pointSet is one verdict group of a measured-against-reference plot.
type pointSet struct {
	xy   plotter.XYs
	errs plotter.YErrors
	ids  []string
}

func (s *pointSet) Len() int                        { return len(s.xy) }
func (s *pointSet) XY(i int) (float64, float64)     { return s.xy[i].X, s.xy[i].Y }
func (s *pointSet) YError(i int) (float64, float64) { return s.errs[i].Low, s.errs[i].High }

// scatterSVG draws measured median against reference for one quantity on
// log–log axes: the identity line, the tolerance band, and one point per
// vial with error bars of ±1 SD, shaped and coloured by verdict.
func scatterSVG(q, unit string, vials []*phantom.VialQA, tol *phantom.Tolerance) ([]byte, error) {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, r := range vials {
		if !usable(r) {
			continue
		}
		sd := r.SD
		if !(sd >= 0) || math.IsInf(sd, 0) {
			sd = 0
		}
		lo = math.Min(lo, math.Min(r.Reference, r.Median))
		hi = math.Max(hi, math.Max(r.Reference, r.Median+sd))
	}
	if math.IsInf(lo, 1) {
		return nil, nil // nothing to plot
	}
	lo, hi = lo/1.5, hi*1.5

	p := newPlot(q+": measured against reference", fmt.Sprintf("reference %s (%s)", q, unit), fmt.Sprintf("measured median %s (%s)", q, unit))
	p.X.Scale, p.Y.Scale = plot.LogScale{}, plot.LogScale{}
	p.X.Tick.Marker, p.Y.Tick.Marker = plot.LogTicks{Prec: -1}, plot.LogTicks{Prec: -1}

	// Tolerance band, sampled at 80 log-spaced references.
	band := bandPoints(vials, tol, lo, hi, 80)
	if len(band) > 2 {
		poly, err := plotter.NewPolygon(band)
		if err != nil {
			return nil, err
		}
		poly.Color = color.RGBA{86, 180, 233, 70}
		poly.LineStyle.Width = 0
		p.Add(poly)
		p.Legend.Add("tolerance band", poly)
	}
	id, err := plotter.NewLine(plotter.XYs{{X: lo, Y: lo}, {X: hi, Y: hi}})
	if err != nil {
		return nil, err
	}
	id.Color = color.RGBA{60, 60, 60, 255}
	id.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
	p.Add(id)
	p.Legend.Add("measured = reference", id)

	groups := map[string]*pointSet{}
	for _, r := range vials {
		if !usable(r) {
			continue
		}
		g := groups[r.Verdict]
		if g == nil {
			g = &pointSet{}
			groups[r.Verdict] = g
		}
		sd := r.SD
		if !(sd >= 0) || math.IsInf(sd, 0) {
			sd = 0
		}
		low := math.Min(sd, r.Median-lo*1.001) // keep the bar on the axis
		g.xy = append(g.xy, plotter.XY{X: r.Reference, Y: r.Median})
		g.errs = append(g.errs, struct{ Low, High float64 }{math.Max(low, 0), sd})
		g.ids = append(g.ids, shortID(r.ID))
	}
	for _, v := range []string{phantom.Pass, phantom.Fail, phantom.Undetermined, phantom.NotMeasured} {
		g := groups[v]
		if g == nil {
			continue
		}
		eb, err := plotter.NewYErrorBars(g)
		if err != nil {
			return nil, err
		}
		eb.Color = verdictColor(v)
		p.Add(eb)
		sc, err := plotter.NewScatter(g.xy)
		if err != nil {
			return nil, err
		}
		sc.Color = verdictColor(v)
		sc.Radius = vg.Points(3.5)
		sc.Shape = draw.CircleGlyph{}
		if v == phantom.Fail {
			sc.Shape = draw.TriangleGlyph{}
			sc.Radius = vg.Points(4.5)
		}
		p.Add(sc)
		p.Legend.Add(v, sc)
		lb, err := plotter.NewLabels(plotter.XYLabels{XYs: g.xy, Labels: g.ids})
		if err != nil {
			return nil, err
		}
		for i := range lb.TextStyle {
			lb.TextStyle[i].Font.Typeface, lb.TextStyle[i].Font.Variant = sans.Typeface, sans.Variant
			lb.TextStyle[i].Font.Size = vg.Points(8)
		}
		lb.Offset = vg.Point{X: vg.Points(5), Y: -vg.Points(10)}
		p.Add(lb)
	}
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = lo, hi, lo, hi
	p.Legend.Top, p.Legend.Left = true, true
	p.Legend.ThumbnailWidth = vg.Points(18)
	return renderSVG(p)
}

// bandPoints returns the outline of the tolerance band between lo and hi:
// upper edge left to right, then lower edge right to left, the lower edge
// kept on the axis. With tol the band is ref ± max(Pct % of ref, Abs) at
// n log-spaced references; without, it joins the vials' own tolerances
// in order of reference.
func bandPoints(vials []*phantom.VialQA, tol *phantom.Tolerance, lo, hi float64, n int) plotter.XYs {
	type pt struct{ x, t float64 }
	var pts []pt
	if tol != nil {
		for k := 0; k < n; k++ {
			x := lo * math.Pow(hi/lo, float64(k)/float64(n-1))
			pts = append(pts, pt{x, math.Max(tol.Pct/100*x, tol.Abs)})
		}
	} else {
		for _, r := range vials {
			if r.Reference > 0 && r.Tolerance > 0 && !math.IsInf(r.Reference, 0) && !math.IsInf(r.Tolerance, 0) {
				pts = append(pts, pt{r.Reference, r.Tolerance})
			}
		}
		sort.Slice(pts, func(a, b int) bool { return pts[a].x < pts[b].x })
	}
	if len(pts) < 2 {
		return nil
	}
	xy := make(plotter.XYs, 0, 2*len(pts))
	for _, q := range pts {
		xy = append(xy, plotter.XY{X: q.x, Y: math.Min(q.x+q.t, hi)})
	}
	for k := len(pts) - 1; k >= 0; k-- {
		q := pts[k]
		xy = append(xy, plotter.XY{X: q.x, Y: math.Max(q.x-q.t, lo)})
	}
	return xy
}

// devBars draws one bar per vial, coloured by verdict, and the vial's
// tolerance (±100·tolerance/reference %) as dashed marks across its slot.
type devBars struct {
	dev, tol []float64 // percent; tol NaN when unknown
	verdict  []string
	measured []bool
}

func (b *devBars) Plot(c draw.Canvas, plt *plot.Plot) {
	trX, trY := plt.Transforms(&c)
	slot := trX(1) - trX(0)
	if len(b.dev) == 1 {
		slot = c.Max.X - c.Min.X
	}
	hw := slot * 0.32
	for i, d := range b.dev {
		x := trX(float64(i))
		if b.measured[i] {
			y0, y1 := trY(0), trY(d)
			pts := []vg.Point{{X: x - hw, Y: y0}, {X: x + hw, Y: y0}, {X: x + hw, Y: y1}, {X: x - hw, Y: y1}}
			c.FillPolygon(verdictColor(b.verdict[i]), c.ClipPolygonY(pts))
			if b.verdict[i] == phantom.Fail {
				hatch(&c, x-hw, x+hw, min(y0, y1), max(y0, y1))
			}
		}
		if t := b.tol[i]; !math.IsNaN(t) {
			ls := draw.LineStyle{Color: color.RGBA{40, 40, 40, 255}, Width: vg.Points(1.2), Dashes: []vg.Length{vg.Points(3), vg.Points(2)}}
			for _, s := range []float64{t, -t} {
				c.StrokeLines(ls, c.ClipLinesY([]vg.Point{{X: x - slot*0.48, Y: trY(s)}, {X: x + slot*0.48, Y: trY(s)}})...)
			}
		}
	}
}

func (b *devBars) DataRange() (xmin, xmax, ymin, ymax float64) {
	xmin, xmax = -0.5, float64(len(b.dev))-0.5
	for i := range b.dev {
		if b.measured[i] {
			ymin, ymax = math.Min(ymin, b.dev[i]), math.Max(ymax, b.dev[i])
		}
		if t := b.tol[i]; !math.IsNaN(t) {
			ymin, ymax = math.Min(ymin, -t), math.Max(ymax, t)
		}
	}
	return xmin, xmax, ymin, ymax
}

// swatch is a legend thumbnail: a filled box.
type swatch color.RGBA

func (s swatch) Thumbnail(c *draw.Canvas) {
	c.FillPolygon(color.RGBA(s), []vg.Point{c.Min, {X: c.Max.X, Y: c.Min.Y}, c.Max, {X: c.Min.X, Y: c.Max.Y}})
}

// hatchSwatch is the legend thumbnail of a failed vial's bar.
type hatchSwatch color.RGBA

func (s hatchSwatch) Thumbnail(c *draw.Canvas) {
	swatch(s).Thumbnail(c)
	hatch(c, c.Min.X, c.Max.X, c.Min.Y, c.Max.Y)
}

// hatch outlines the box in black and draws white horizontal stripes
// across it, so a failed bar differs from a passing one in greyscale
// print, not by colour alone.
func hatch(c *draw.Canvas, x0, x1, y0, y1 vg.Length) {
	white := draw.LineStyle{Color: color.White, Width: vg.Points(1)}
	for y := y0 + vg.Points(2.5); y < y1-vg.Points(1); y += vg.Points(3.5) {
		c.StrokeLines(white, c.ClipLinesY([]vg.Point{{X: x0, Y: y}, {X: x1, Y: y}})...)
	}
	black := draw.LineStyle{Color: color.Black, Width: vg.Points(1.4)}
	c.StrokeLines(black, c.ClipLinesY([]vg.Point{{X: x0, Y: y0}, {X: x1, Y: y0}, {X: x1, Y: y1}, {X: x0, Y: y1}, {X: x0, Y: y0}})...)
}

// dashMark is the legend thumbnail of the tolerance marks.
type dashMark struct{}

func (dashMark) Thumbnail(c *draw.Canvas) {
	y := (c.Min.Y + c.Max.Y) / 2
	c.StrokeLine2(draw.LineStyle{Color: color.RGBA{40, 40, 40, 255}, Width: vg.Points(1.2), Dashes: []vg.Length{vg.Points(3), vg.Points(2)}}, c.Min.X, y, c.Max.X, y)
}

// deviationSVG draws the deviation from reference (percent) of every
// vial of one quantity as bars coloured by verdict, with each vial's
// tolerance as dashed marks. Vials without a measurement get no bar.
func deviationSVG(q string, vials []*phantom.VialQA) ([]byte, error) {
	if len(vials) == 0 {
		return nil, nil
	}
	b := &devBars{}
	names := make([]string, len(vials))
	for i, r := range vials {
		names[i] = shortID(r.ID)
		ok := r.Verdict == phantom.Pass || r.Verdict == phantom.Fail
		d := r.Deviation
		if math.IsNaN(d) || math.IsInf(d, 0) {
			ok, d = false, 0
		}
		t := math.NaN()
		if r.Reference > 0 && r.Tolerance > 0 && !math.IsInf(r.Tolerance, 0) {
			t = 100 * r.Tolerance / r.Reference
		}
		b.dev, b.tol, b.verdict, b.measured = append(b.dev, d), append(b.tol, t), append(b.verdict, r.Verdict), append(b.measured, ok)
	}
	p := newPlot(q+": deviation from reference", "vial", "deviation (%)")
	p.Add(plotter.NewGrid())
	p.Add(b)
	p.NominalX(names...)
	zero, err := plotter.NewLine(plotter.XYs{{X: -0.5, Y: 0}, {X: float64(len(vials)) - 0.5, Y: 0}})
	if err != nil {
		return nil, err
	}
	zero.Color = color.RGBA{0, 0, 0, 255}
	p.Add(zero)
	p.Legend.Add(phantom.Pass, swatch(passColor))
	p.Legend.Add(phantom.Fail, hatchSwatch(failColor))
	p.Legend.Add("± tolerance", dashMark{})
	p.Legend.Top = true
	p.Legend.ThumbnailWidth = vg.Points(18)
	_, _, ymin, ymax := b.DataRange()
	pad := 0.25 * math.Max(ymax-ymin, 1)
	p.Y.Min, p.Y.Max = ymin-pad, ymax+2*pad // room for the legend
	if len(names) > 12 {
		p.X.Tick.Label.Rotation = math.Pi / 2
		p.X.Tick.Label.XAlign, p.X.Tick.Label.YAlign = draw.XRight, draw.YCenter
	}
	return renderSVG(p)
}

func renderSVG(p *plot.Plot) ([]byte, error) {
	wt, err := p.WriterTo(plotW, plotH, "svg")
	if err != nil {
		return nil, fmt.Errorf("report: plot: %w", err)
	}
	var buf bytes.Buffer
	if _, err := wt.WriteTo(&buf); err != nil {
		return nil, fmt.Errorf("report: plot: %w", err)
	}
	return buf.Bytes(), nil
}
