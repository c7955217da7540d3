package report

import (
	_ "embed"
	"encoding/base64"
	"errors"
	"fmt"
	"html/template"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/io/preview"
	"github.com/tauvox/tauvox/roi/phantom"
)

//go:embed report.html.tmpl
var pageTemplate string

var tmpl = template.Must(template.New("report").Parse(pageTemplate))

// Write renders p as a self-contained HTML page and writes it to path
// atomically (a temporary file in the same folder, renamed when
// complete). An existing file at path is replaced. It returns an error
// naming path when p has no QA result, when a view is inconsistent, or
// when writing fails.
func Write(path string, p *Page) error {
	if p == nil || p.QA == nil {
		return fmt.Errorf("%s: report: no QA result", path)
	}
	d, err := build(p)
	if err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	return writeAtomic(path, func(w io.Writer) error { return tmpl.Execute(w, d) })
}

// Render writes the page of p to w, as Write does without the file.
func Render(w io.Writer, p *Page) error {
	if p == nil || p.QA == nil {
		return errors.New("report: no QA result")
	}
	d, err := build(p)
	if err != nil {
		return err
	}
	return tmpl.Execute(w, d)
}

// writeAtomic writes through fn into a temporary file beside path and
// renames it to path when everything succeeded.
func writeAtomic(path string, fn func(io.Writer) error) error {
	return output.WriteWith(path, fn)
}

// The template's data: every value already formatted as text. Texts from
// files stay plain strings, so html/template escapes them; only the data:
// URIs tauvox makes itself are typed as template.URL.
type pageData struct {
	Phantom, Scanner, When, Field, Temperature string
	Verdict, VerdictText, Counts               string
	Headline                                   []string
	WarnText                                   string
	Extrapolated                               bool
	Caution, Tool, Format                      string
	Quantities                                 []quantityData
	Rows                                       []rowData
	Series                                     []seriesData
	Identity                                   *identityData
}

// identityData is the identity panel: how the vials were told apart, and
// the evidence (measured against reference for the chosen placement and
// the runner-up).
type identityData struct {
	Status, Reason, Fix, Measure, Threshold string
	Groups                                  []identityGroupData
}

type identityGroupData struct {
	Quantities, Status, Reason, Placements, Residual string
	Chosen, RunnerUp, Margin, Scale, Z               string
	Rows                                             []evidenceRow
}

type evidenceRow struct {
	ID, Quantity, Reference, Chosen, ChosenRatio, RunnerUp, RunnerUpRatio string
}

type quantityData struct {
	Name, Anchor, Unit, Counts string
	Map, Bar                   template.URL
	MapW, MapH, Slice          int
	Window, Table, Orientation string
	Scatter, Deviation         template.URL
	BandText                   string
}

type rowData struct {
	ID, Quantity, N, Mean, Median, SD, Reference, Deviation, Tolerance, Verdict, Note string
	Mark                                                                              string // a shape for the verdict, readable in greyscale
}

type seriesData struct {
	Quantity, Map, Slice, Centre, Rotation, Mirrored, Confidence, LocMethod, Residual string
	Model, FitMethod, Protocol, Description                                           string
	Inputs                                                                            []inputData
}

type inputData struct{ Path, Role, Sum, FullSum string }

func build(p *Page) (*pageData, error) {
	qa := p.QA
	s := qa.Session
	d := &pageData{
		Phantom:      display(s.Phantom, maxDisplay),
		Scanner:      display(s.Scanner, maxDisplay),
		When:         strings.TrimSpace(s.Date + " " + s.Time),
		Field:        num(s.Field, 2, " T"),
		Temperature:  num(s.Temperature, 1, " °C"),
		Verdict:      verdictClass(qa.Verdict),
		Extrapolated: s.Extrapolated,
		Caution:      qa.Caution,
		Format:       orDash(qa.Format),
		Tool:         strings.TrimSpace(orDash(qa.Tool.Name) + " " + qa.Tool.Version),
	}
	if d.When == "" {
		d.When = "–"
	}
	if d.Caution == "" {
		d.Caution = output.Caution
	}
	frac := p.WarnFraction
	if frac == 0 {
		frac = DefaultWarnFraction
	}
	shown := make([]string, len(qa.Vials))
	for i := range qa.Vials {
		shown[i] = shownVerdict(&qa.Vials[i], frac, p.History)
		if shown[i] == Warn && d.Verdict == phantom.Pass {
			d.Verdict = Warn
		}
	}
	d.VerdictText = strings.ToUpper(strings.ReplaceAll(d.Verdict, "-", " "))
	d.Counts = counts(qa.Vials, shown)
	d.Headline = headlines(qa.Vials, shown, frac, p.History)
	if frac > 0 {
		d.WarnText = fmt.Sprintf(" A passing vial is shown as warn when its deviation uses more than %g %% of its tolerance or its stability history flags it.", 100*frac)
	}

	byQ := map[string][]*phantom.VialQA{}
	var order []string
	addQ := func(q string) {
		if _, ok := byQ[q]; !ok {
			byQ[q] = nil
			order = append(order, q)
		}
	}
	for _, sr := range qa.Series {
		addQ(sr.Quantity)
	}
	for i := range qa.Vials {
		r := &qa.Vials[i]
		addQ(r.Quantity)
		byQ[r.Quantity] = append(byQ[r.Quantity], r)
		rd := row(r)
		if shown[i] == Warn {
			rd.Verdict = Warn
			if why := p.History[HistoryKey(r.ID, r.Quantity)]; why != "" {
				rd.Note = strings.TrimPrefix(rd.Note+"; history: "+why, "; ")
			}
		}
		rd.Mark = verdictMark(rd.Verdict)
		d.Rows = append(d.Rows, rd)
	}
	views := map[string]*View{}
	for i := range p.Views {
		v := &p.Views[i]
		addQ(v.Quantity)
		if views[v.Quantity] == nil {
			views[v.Quantity] = v
		}
	}
	for k, q := range order {
		vials := byQ[q]
		var qShown []string
		for i := range qa.Vials {
			if qa.Vials[i].Quantity == q {
				qShown = append(qShown, shown[i])
			}
		}
		qd := quantityData{Name: orDash(q), Anchor: fmt.Sprint(k + 1), Unit: preview.DefaultUnit(q), Counts: counts(derefs(vials), qShown)}
		if v := views[q]; v != nil {
			if v.Unit != "" {
				qd.Unit = v.Unit
			}
			m, b, err := renderView(v)
			if err != nil {
				return nil, err
			}
			qd.Map, qd.Bar = dataURI("image/png", m), dataURI("image/png", b)
			cfg := previewSize(v)
			qd.MapW, qd.MapH, qd.Slice = cfg.X, cfg.Y, v.Slice
			lo, hi := v.Window.Resolve(v.Values)
			qd.Window = fmt.Sprintf("%.4g–%.4g", lo, hi)
			if v.Window.IsAuto() {
				qd.Window += " (1st–99th percentile)"
			}
			cm, rev := preview.ForQuantity(q)
			qd.Table = cm.Name
			if rev {
				qd.Table += " reversed"
			}
			qd.Orientation = "columns: i left to right; rows: j decreasing downwards"
		}
		var tol *phantom.Tolerance
		if t, ok := p.Tolerance[q]; ok {
			tol = &t
			qd.BandText = fmt.Sprintf("Shaded: the tolerance band, reference ± max(%g %% of the reference, %g %s), the phantom definition's limit for %s.", t.Pct, t.Abs, qd.Unit, q)
		} else {
			qd.BandText = "Shaded: the vials' own tolerances (reference ± tolerance) joined in order of reference."
		}
		sc, err := scatterSVG(q, qd.Unit, vials, tol)
		if err != nil {
			return nil, err
		}
		if sc != nil {
			qd.Scatter = dataURI("image/svg+xml", sc)
		}
		dv, err := deviationSVG(q, vials)
		if err != nil {
			return nil, err
		}
		if dv != nil {
			qd.Deviation = dataURI("image/svg+xml", dv)
		}
		d.Quantities = append(d.Quantities, qd)
	}
	for _, sr := range qa.Series {
		d.Series = append(d.Series, series(&sr))
	}
	if qa.Identity != nil {
		d.Identity = identity(qa.Identity)
	}
	return d, nil
}

func identity(id *phantom.Identity) *identityData {
	d := &identityData{Status: id.Status, Reason: id.Reason, Fix: id.Fix, Measure: id.Measure, Threshold: fmt.Sprintf("%g", id.Threshold)}
	choice := func(c *phantom.Choice) string {
		if c == nil {
			return "–"
		}
		face := "up"
		if c.Mirrored {
			face = "down"
		}
		return fmt.Sprintf("turned %.1f°, face %s; cost %.4f", c.Rotation, face, c.Cost)
	}
	opt := func(v *float64, dec int) string {
		if v == nil {
			return "–"
		}
		return num(*v, dec, "")
	}
	ratio := func(m *float64, ref float64) string {
		if m == nil || !(ref > 0) {
			return "–"
		}
		return fmt.Sprintf("%+.1f %%", 100*(*m-ref)/ref)
	}
	for _, g := range id.Groups {
		gd := identityGroupData{Quantities: strings.Join(g.Quantities, " + "), Status: g.Status, Reason: g.Reason,
			Placements: fmt.Sprintf("%d (%d allowed by the layout's symmetry)", g.Placements, g.Symmetries),
			Residual:   num(g.Residual, 2, " mm"), Chosen: choice(&g.Chosen), RunnerUp: choice(g.RunnerUp),
			Margin: opt(g.Margin, 4), Scale: num(g.Scale, 4, ""), Z: opt(g.Z, 1)}
		for _, e := range g.Evidence {
			gd.Rows = append(gd.Rows, evidenceRow{ID: display(e.ID, maxDisplay), Quantity: display(e.Quantity, maxDisplay),
				Reference: num(e.Reference, 1, ""), Chosen: opt(e.Chosen, 1), ChosenRatio: ratio(e.Chosen, e.Reference),
				RunnerUp: opt(e.RunnerUp, 1), RunnerUpRatio: ratio(e.RunnerUp, e.Reference)})
		}
		d.Groups = append(d.Groups, gd)
	}
	return d
}

func derefs(v []*phantom.VialQA) []phantom.VialQA {
	out := make([]phantom.VialQA, len(v))
	for i, r := range v {
		out[i] = *r
	}
	return out
}

// previewSize is the displayed size of a view's picture, as renderView
// draws it.
func previewSize(v *View) (pt struct{ X, Y int }) {
	dx, dy := v.PixelMM[0], v.PixelMM[1]
	if !(dx > 0) || !(dy > 0) || math.IsInf(dx, 0) || math.IsInf(dy, 0) {
		dx, dy = 1, 1
	}
	p := previewWidth / (float64(v.Nx) * dx)
	pt.X = previewWidth
	pt.Y = max(1, min(int(math.Round(float64(v.Ny)*dy*p)), 3*previewWidth))
	return pt
}

func dataURI(mime string, b []byte) template.URL {
	// The content is base64, so the URI holds no character that could
	// leave the attribute.
	return template.URL("data:" + mime + ";base64," + base64.StdEncoding.EncodeToString(b))
}

func verdictClass(v string) string {
	switch v {
	case phantom.Pass, phantom.Fail, Warn, phantom.Undetermined:
		return v
	}
	return phantom.NotMeasured
}

// counts summarises the verdicts shown (shown[i] for vials[i]).
func counts(vials []phantom.VialQA, shown []string) string {
	var pass, warn, fail, und, nm int
	for i := range vials {
		switch shown[i] {
		case phantom.Pass:
			pass++
		case Warn:
			warn++
		case phantom.Fail:
			fail++
		case phantom.Undetermined:
			und++
		default:
			nm++
		}
	}
	if und > 0 {
		return fmt.Sprintf("%d of %d vial measurements passed, %d warn, %d failed, %d undetermined, %d not measured", pass, len(vials), warn, fail, und, nm)
	}
	return fmt.Sprintf("%d of %d vial measurements passed, %d warn, %d failed, %d not measured", pass, len(vials), warn, fail, nm)
}

// shownVerdict is the verdict the report shows for r: warn for a passing
// vial beyond frac of its tolerance (frac > 0) or flagged by its history.
func shownVerdict(r *phantom.VialQA, frac float64, hist map[string]string) string {
	if r.Verdict != phantom.Pass {
		return r.Verdict
	}
	if hist[HistoryKey(r.ID, r.Quantity)] != "" {
		return Warn
	}
	if frac > 0 && r.Tolerance > 0 && math.Abs(r.Median-r.Reference) > frac*r.Tolerance {
		return Warn
	}
	return phantom.Pass
}

// verdictMark is a shape that tells the verdicts apart without colour.
func verdictMark(v string) string {
	switch v {
	case phantom.Pass:
		return "✓"
	case Warn:
		return "!"
	case phantom.Fail:
		return "✗"
	case phantom.Undetermined:
		return "?"
	}
	return "–"
}

// headlines name the failing and warned vials with their deviation and
// tolerance in percent and in ms.
func headlines(vials []phantom.VialQA, shown []string, frac float64, hist map[string]string) []string {
	var fail, warn []string
	for i := range vials {
		r := &vials[i]
		if shown[i] != phantom.Fail && shown[i] != Warn {
			continue
		}
		txt := fmt.Sprintf("%s %s %s (%s ms) against a tolerance of ±%s (±%s ms)", display(r.ID, 24), display(r.Quantity, 12),
			pctText(r.Deviation), signedNum(r.Median-r.Reference), pctText(100 * r.Tolerance / r.Reference)[len("+"):], num(r.Tolerance, 1, ""))
		if shown[i] == phantom.Fail {
			fail = append(fail, txt)
			continue
		}
		if why := hist[HistoryKey(r.ID, r.Quantity)]; why != "" {
			txt += "; history: " + why
		} else {
			txt += fmt.Sprintf("; %.0f %% of the tolerance used", 100*math.Abs(r.Median-r.Reference)/r.Tolerance)
		}
		warn = append(warn, txt)
	}
	var out []string
	if len(fail) > 0 {
		out = append(out, "Failed: "+strings.Join(fail, "; ")+".")
	}
	if len(warn) > 0 {
		out = append(out, "Warn: "+strings.Join(warn, "; ")+".")
	}
	return out
}

// pctText is a signed percentage with one decimal (U+2212 for minus).
func pctText(v float64) string {
	if !finite(v) {
		return "–"
	}
	return strings.Replace(fmt.Sprintf("%+.1f %%", v), "-", "−", 1)
}

// signedNum is a signed number with one decimal (U+2212 for minus).
func signedNum(v float64) string {
	if !finite(v) {
		return "–"
	}
	return strings.Replace(fmt.Sprintf("%+.1f", v), "-", "−", 1)
}

func row(r *phantom.VialQA) rowData {
	rd := rowData{
		ID: display(r.ID, maxDisplay), Quantity: display(r.Quantity, maxDisplay), N: fmt.Sprint(r.N),
		Mean: num(r.Mean, 1, ""), Median: num(r.Median, 1, ""), SD: num(r.SD, 1, ""),
		Reference: "–", Deviation: "–", Tolerance: "–",
		Verdict: verdictClass(r.Verdict), Note: r.Note,
	}
	if r.Reference > 0 {
		rd.Reference = num(r.Reference, 1, "") + " ± " + num(r.RefUncPct, 1, " %")
		if rd.Verdict != phantom.NotMeasured && rd.Verdict != phantom.Undetermined {
			rd.Deviation = pctText(r.Deviation) + " (" + signedNum(r.Median-r.Reference) + " ms)"
		}
	}
	if r.Tolerance > 0 {
		rd.Tolerance = "± " + num(r.Tolerance, 1, " ms")
		if r.Reference > 0 {
			rd.Tolerance = "± " + num(100*r.Tolerance/r.Reference, 1, " %") + " (± " + num(r.Tolerance, 1, " ms") + ")"
		}
	}
	return rd
}

func series(sr *phantom.SeriesRef) seriesData {
	l := sr.Localisation
	sd := seriesData{
		Quantity: display(sr.Quantity, maxDisplay), Map: orDash(sr.Map), Slice: fmt.Sprint(l.Slice),
		Centre:     fmt.Sprintf("%s, %s, %s", num(l.Center[0], 1, ""), num(l.Center[1], 1, ""), num(l.Center[2], 1, "")),
		Rotation:   num(l.Rotation, 1, "°"),
		Mirrored:   "no",
		Confidence: num(l.Confidence, 2, ""),
		LocMethod:  orDash(l.Method),
		FitMethod:  orDash(sr.Method),
		Residual:   num(l.Residual, 2, " mm"),
		Model:      orDash(sr.Model),
		Protocol:   protocol(sr.Protocol),
	}
	if strings.TrimSpace(sr.Description) != "" {
		sd.Description = display(sr.Description, maxDisplay)
	}
	if l.Mirrored {
		sd.Mirrored = "yes"
	}
	for _, in := range sr.Inputs {
		id := inputData{Path: in.Path, Role: in.Role, FullSum: in.SHA256, Sum: in.SHA256}
		if len(id.Sum) > 12 {
			id.Sum = id.Sum[:12] + "…" // checksums are hex, so byte slicing is safe
		}
		sd.Inputs = append(sd.Inputs, id)
	}
	return sd
}

// protocol summarises the acquisition parameters of a series: for each of
// TE, TI, TR and flip angle the distinct values in order of first
// appearance (at most 8, then the count), e.g. "TE 10, 20, 30 ms; TR 2000 ms
// (3 volumes)".
func protocol(ps []phantom.Protocol) string {
	if len(ps) == 0 {
		return "–"
	}
	var parts []string
	for _, f := range []struct {
		name, unit string
		get        func(phantom.Protocol) *float64
	}{
		{"TE", " ms", func(p phantom.Protocol) *float64 { return p.TE }},
		{"TI", " ms", func(p phantom.Protocol) *float64 { return p.TI }},
		{"TR", " ms", func(p phantom.Protocol) *float64 { return p.TR }},
		{"flip angle", "°", func(p phantom.Protocol) *float64 { return p.FA }},
	} {
		var vals []float64
		seen := map[float64]bool{}
		for _, p := range ps {
			if v := f.get(p); v != nil && !seen[*v] {
				seen[*v] = true
				vals = append(vals, *v)
			}
		}
		if len(vals) == 0 {
			continue
		}
		var txt []string
		for i, v := range vals {
			if i == 8 {
				txt = append(txt, fmt.Sprintf("… (%d values)", len(vals)))
				break
			}
			txt = append(txt, strconv.FormatFloat(v, 'g', 6, 64))
		}
		parts = append(parts, f.name+" "+strings.Join(txt, ", ")+f.unit)
	}
	if len(parts) == 0 {
		return fmt.Sprintf("%d volumes, parameters unknown", len(ps))
	}
	return fmt.Sprintf("%s (%d volumes)", strings.Join(parts, "; "), len(ps))
}

func orDash(s string) string {
	if strings.TrimSpace(s) == "" {
		return "–"
	}
	return s
}

// num formats v with dec decimals and a unit, or "–" when not finite.
func num(v float64, dec int, unit string) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "–"
	}
	return fmt.Sprintf("%.*f%s", dec, v, unit)
}
