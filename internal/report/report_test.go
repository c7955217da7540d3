package report

import (
	"bytes"
	"encoding/base64"
	"encoding/xml"
	"errors"
	"fmt"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/roi/phantom"
)

// Hostile texts, as a file could carry them. If escaping failed, the ones
// with console.log would print the marker in the browser's console.
const (
	hostileScanner = `<script>alert(1)</script>`
	hostileVial    = `"><img src=x onerror=console.log("tauvox-injected")>`
	hostileMap     = `maps/<script>console.log("tauvox-injected")</script>T1map.nii.gz`
)

// The invented test phantom: 10 vials, references in ms (invented, of the
// order of doped-water phantoms; check-values.md §2.8 says what such a
// table holds).
var (
	t1Ref = []float64{100, 180, 280, 400, 550, 750, 1000, 1300, 1700, 2200}
	t2Ref = []float64{20, 35, 55, 80, 110, 150, 200, 260, 330, 420}
	// Relative deviations of the measured medians; vial 4 of T1 fails
	// (+9 % against 5 %), vial 10 of T2 is not measured.
	t1Dev = []float64{0.01, -0.02, 0.015, 0.09, -0.01, 0.005, -0.03, 0.02, 0.0, -0.015}
	t2Dev = []float64{0.03, -0.05, 0.02, 0.01, -0.04, 0.06, -0.02, 0.0, 0.04, 0}
	tols  = map[string]phantom.Tolerance{"T1": {Pct: 5, Abs: 5}, "T2": {Pct: 10, Abs: 2}}
)

func vialID(k int, hostile bool) string {
	if hostile && k == 2 {
		return hostileVial
	}
	return string(rune('A'+k/5)) + string(rune('1'+k%5))
}

// vialPos returns vial k's centre in mm from the phantom centre: nine on
// a ring of 60 mm, the tenth in the middle.
func vialPos(k int) (x, y float64) {
	if k == 9 {
		return 0, 0
	}
	a := 2 * math.Pi * float64(k) / 9
	return 60 * math.Sin(a), 60 * math.Cos(a)
}

func testQA(hostile bool) *phantom.QA {
	qa := &phantom.QA{
		Format:  phantom.QAFormat,
		Tool:    phantom.Tool{Name: "tauvox", Version: "0.0.0-test"},
		Session: phantom.Session{Scanner: "MR-3", Date: "2026-03-02", Time: "08:15", Field: 1.5, Temperature: 20.4, Phantom: "demo phantom"},
		Caution: output.Caution,
	}
	if hostile {
		qa.Session.Scanner = hostileScanner
	}
	te := func(v float64) *float64 { return &v }
	for _, q := range []string{"T1", "T2"} {
		sr := phantom.SeriesRef{
			Quantity: q, Map: "maps/" + q + "map.nii.gz", Model: "t1-ir", Method: "nlls",
			Localisation: phantom.Localisation{Center: [3]float64{1.2, -3.4, 10}, Rotation: 12.5, Slice: 4, Confidence: 0.93, Method: "found", Residual: 0.41},
			Inputs:       []phantom.FileRef{{Path: "dicom/series7", Role: "series", SHA256: strings.Repeat("ab12", 16)}},
		}
		if q == "T2" {
			sr.Model = "t2"
			sr.Localisation.Mirrored = true
			for i := 1; i <= 16; i++ {
				sr.Protocol = append(sr.Protocol, phantom.Protocol{TE: te(10 * float64(i)), TR: te(2000)})
			}
		} else {
			for _, ti := range []float64{50, 150, 400, 1000, 2500} {
				sr.Protocol = append(sr.Protocol, phantom.Protocol{TI: te(ti), TR: te(5000)})
			}
			if hostile {
				sr.Map = hostileMap
			}
		}
		qa.Series = append(qa.Series, sr)
	}
	for _, q := range []string{"T1", "T2"} {
		refs, devs := t1Ref, t1Dev
		if q == "T2" {
			refs, devs = t2Ref, t2Dev
		}
		for k := range refs {
			ref := refs[k]
			m := ref * (1 + devs[k])
			r := phantom.VialQA{
				ID: vialID(k, hostile), Quantity: q, N: 120, Mean: m * 1.002, Median: m, SD: 0.03 * m,
				Reference: ref, RefUncPct: 1.5,
			}
			t := tols[q]
			r.Tolerance = math.Max(t.Pct/100*ref, t.Abs)
			if q == "T2" && k == 9 {
				r.N, r.Median, r.Mean, r.SD = 2, math.NaN(), math.NaN(), math.NaN()
				r.Verdict, r.Note = phantom.NotMeasured, "2 usable voxels"
			} else {
				r.Deviation = 100 * (m - ref) / ref
				r.Verdict = phantom.Pass
				if math.Abs(m-ref) > r.Tolerance {
					r.Verdict = phantom.Fail
				}
			}
			qa.Vials = append(qa.Vials, r)
		}
	}
	qa.Verdict = phantom.Overall(qa.Vials)
	return qa
}

// testView draws an invented 80×80 slice of 2.5 mm pixels: the phantom
// body (radius 90 mm) filled with a background value, the vials (radius
// 11 mm) at their measured medians with a ±2 % ripple, NaN outside.
func testView(qa *phantom.QA, q string) View {
	const n, px = 80, 2.5
	v := View{Quantity: q, Unit: "ms", Nx: n, Ny: n, PixelMM: [2]float64{px, px}, Slice: 4, Values: make([]float32, n*n)}
	fill := 2400.0
	if q == "T2" {
		fill = 1800
	}
	var vials []phantom.VialQA
	for _, r := range qa.Vials {
		if r.Quantity == q {
			vials = append(vials, r)
		}
	}
	for j := 0; j < n; j++ {
		for i := 0; i < n; i++ {
			x, y := (float64(i)-39.5)*px, (float64(j)-39.5)*px
			val := math.NaN()
			if math.Hypot(x, y) < 90 {
				val = fill
			}
			for k, r := range vials {
				vx, vy := vialPos(k)
				if math.Hypot(x-vx, y-vy) < 11 {
					val = r.Reference * (1 + t1DevOr(q, k)) * (1 + 0.02*math.Sin(float64(3*i+7*j)))
					if q == "T2" && k == 9 {
						val = math.NaN() // failed fits
					}
				}
			}
			v.Values[i+n*j] = float32(val)
		}
	}
	for k, r := range vials {
		vx, vy := vialPos(k)
		v.Regions = append(v.Regions, Region{ID: r.ID, I: vx/px + 39.5, J: vy/px + 39.5, Radius: 8 / px, Verdict: r.Verdict})
	}
	return v
}

func t1DevOr(q string, k int) float64 {
	if q == "T1" {
		return t1Dev[k]
	}
	return t2Dev[k]
}

func testPage(hostile bool) *Page {
	qa := testQA(hostile)
	return &Page{QA: qa, Views: []View{testView(qa, "T1"), testView(qa, "T2")}, Tolerance: tols}
}

// wellFormed parses the page as XML (the template writes XHTML-style
// closed tags), so a broken nesting or an unescaped '<' or '&' fails. It
// also fails on any script element or event-handler attribute, and
// returns the source attributes of the img elements, entities decoded.
func wellFormed(t *testing.T, page []byte) (srcs []string) {
	t.Helper()
	d := xml.NewDecoder(bytes.NewReader(page))
	d.Strict = true
	for {
		tok, err := d.Token()
		if errors.Is(err, io.EOF) {
			return srcs
		}
		if err != nil {
			line, col := d.InputPos()
			t.Fatalf("page is not well-formed at line %d col %d: %v", line, col, err)
		}
		se, ok := tok.(xml.StartElement)
		if !ok {
			continue
		}
		if strings.EqualFold(se.Name.Local, "script") {
			t.Errorf("page has a script element")
		}
		for _, a := range se.Attr {
			if strings.HasPrefix(strings.ToLower(a.Name.Local), "on") {
				t.Errorf("element %s has an event handler %s=%q", se.Name.Local, a.Name.Local, a.Value)
			}
			if se.Name.Local == "img" && a.Name.Local == "src" {
				srcs = append(srcs, a.Value)
			}
		}
	}
}

func writeTest(t *testing.T, p *Page) (string, []byte) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "report.html")
	if err := Write(path, p); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return path, b
}

func TestWriteStructure(t *testing.T) {
	path, b := writeTest(t, testPage(false))
	srcs := wellFormed(t, b)
	s := string(b)
	for _, want := range []string{
		"<title>demo phantom – phantom QA 2026-03-02 08:15</title>",
		`<div class="verdict fail" id="verdict">Session verdict: FAIL<small>18 of 20 vial measurements passed, 0 warn, 1 failed, 1 not measured</small></div>`,
		// The headline names the failing vial, deviation and tolerance in % and ms.
		"<li>Failed: A4 T1 &#43;9.0 % (&#43;36.0 ms) against a tolerance of ±5.0 % (±20.0 ms).</li>",
		output.Caution,
		"MR-3", "1.50 T", "20.4 °C",
		"<h2>T1</h2>", "<h2>T2</h2>",
		"reference ± max(5 % of the reference, 5 ms)",
		"TE 10, 20, 30, 40, 50, 60, 70, 80, … (16 values) ms; TR 2000 ms (16 volumes)",
		"TI 50, 150, 400, 1000, 2500 ms; TR 5000 ms (5 volumes)",
		`title="` + strings.Repeat("ab12", 16) + `">ab12ab12ab12…</code>`, // shortened checksum
	} {
		if !strings.Contains(s, want) {
			t.Errorf("report lacks %q", want)
		}
	}
	for k := 0; k < 10; k++ {
		id := vialID(k, false)
		if n := strings.Count(s, "<tr><td>"+id+"</td>"); n != 2 {
			t.Errorf("vial %s has %d result rows, want 2 (T1, T2)", id, n)
			continue
		}
		// The deviation cell of each row is signed, 100·(median −
		// reference)/reference with one decimal (html/template writes
		// "+" as "&#43;"): the T1 row comes first, then the T2 row.
		rest := s
		for i, dev := range []float64{t1Dev[k], t2Dev[k]} {
			_, rest, _ = strings.Cut(rest, "<tr><td>"+id+"</td>")
			row, _, _ := strings.Cut(rest, "</tr>")
			// The minus is U+2212 (typographic), the plus escaped; the
			// deviation in ms follows in brackets.
			want := strings.ReplaceAll(strings.Replace(fmt.Sprintf(`<td class="num">%+.1f %% (`, 100*dev), "-", "−", 1), "+", "&#43;")
			if i == 1 && k == 9 {
				want = `<td class="num">–</td>` // not measured
			}
			if !strings.Contains(row, want) {
				t.Errorf("vial %s %s row lacks the deviation cell %s:\n%s", id, []string{"T1", "T2"}[i], want, row)
			}
		}
	}
	if !strings.Contains(s, `<td class="v-fail"><span class="mark">✗</span>fail</td>`) || !strings.Contains(s, `<td class="v-not-measured"><span class="mark">–</span>not-measured</td><td>2 usable voxels</td>`) {
		t.Error("fail and not-measured rows missing")
	}
	// Self-contained: no scripts, no external references.
	for _, bad := range []string{"<script", "http:", "https:", "url(", "<link"} {
		if strings.Contains(s, bad) {
			t.Errorf("report contains %q", bad)
		}
	}
	// Every image is a data: URI that decodes: 2 per map view, 2 plots
	// per quantity.
	if len(srcs) != 8 {
		t.Errorf("%d images, want 8", len(srcs))
	}
	for _, uri := range srcs {
		mime, data, ok := strings.Cut(strings.TrimPrefix(uri, "data:"), ";base64,")
		if !ok || !strings.HasPrefix(uri, "data:") {
			t.Fatalf("image source %.40q is not a base64 data: URI", uri)
		}
		raw, err := base64.StdEncoding.DecodeString(data)
		if err != nil {
			t.Fatalf("%s: %v", mime, err)
		}
		switch mime {
		case "image/png":
			if _, err := png.Decode(bytes.NewReader(raw)); err != nil {
				t.Errorf("embedded PNG: %v", err)
			}
		case "image/svg+xml":
			wellFormed(t, raw)
		default:
			t.Errorf("unexpected image type %q", mime)
		}
	}
	// Atomic write: nothing but the report in the folder.
	ents, _ := os.ReadDir(filepath.Dir(path))
	if len(ents) != 1 {
		t.Errorf("%d entries in the output folder, want 1", len(ents))
	}
}

func TestHostileStringsEscaped(t *testing.T) {
	_, b := writeTest(t, testPage(true))
	wellFormed(t, b)
	s := string(b)
	for _, raw := range []string{hostileScanner, hostileVial, hostileMap, "<script", "<img src=x"} {
		if strings.Contains(s, raw) {
			t.Errorf("raw hostile text %q appears in the page", raw)
		}
	}
	for _, esc := range []string{
		`&lt;script&gt;alert(1)&lt;/script&gt;`,
		`&#34;&gt;&lt;img src=x onerror=console.log(&#34;tauvox-injected&#34;)&gt;`,
		`maps/&lt;script&gt;console.log(&#34;tauvox-injected&#34;)&lt;/script&gt;T1map.nii.gz`,
	} {
		if !strings.Contains(s, esc) {
			t.Errorf("escaped text %q missing", esc)
		}
	}
}

func TestWriteErrors(t *testing.T) {
	dir := t.TempDir()
	if err := Write(filepath.Join(dir, "r.html"), &Page{}); err == nil || !strings.Contains(err.Error(), "no QA result") {
		t.Errorf("page without QA: %v", err)
	}
	p := testPage(false)
	p.Views[0].Values = p.Views[0].Values[:10]
	path := filepath.Join(dir, "r.html")
	if err := Write(path, p); err == nil || !strings.Contains(err.Error(), path) || !strings.Contains(err.Error(), "10 values for a 80×80 slice") {
		t.Errorf("bad view: %v", err)
	}
	missing := filepath.Join(dir, "no", "r.html")
	if err := Write(missing, testPage(false)); err == nil || !strings.Contains(err.Error(), missing) {
		t.Errorf("missing folder: %v", err)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Errorf("failed writes left %d entries", len(ents))
	}
}

// TestBand checks the tolerance band edges against the definition's rule
// (design.md: pass when |measured − reference| ≤ max(pct %, abs)).
func TestBand(t *testing.T) {
	tol := &phantom.Tolerance{Pct: 5, Abs: 5}
	xy := bandPoints(nil, tol, 10, 1000, 3) // references 10, 100, 1000
	want := []struct{ x, y float64 }{
		{10, 15}, {100, 105}, {1000, 1000}, // upper edge, clipped at the axis top
		{1000, 950}, {100, 95}, {10, 10}, // lower edge right to left, clipped at the bottom
	}
	if len(xy) != len(want) {
		t.Fatalf("%d band points, want %d", len(xy), len(want))
	}
	for i, w := range want {
		if math.Abs(xy[i].X-w.x) > 1e-9*w.x || math.Abs(xy[i].Y-w.y) > 1e-9*w.y {
			t.Errorf("point %d = %v, want %v", i, xy[i], w)
		}
	}
	// Without a definition limit the band joins the vials' tolerances.
	vials := []*phantom.VialQA{{Reference: 400, Tolerance: 20}, {Reference: 100, Tolerance: 5}}
	xy = bandPoints(vials, nil, 50, 800, 0)
	if len(xy) != 4 || xy[0].X != 100 || xy[0].Y != 105 || xy[1].Y != 420 || xy[3].Y != 95 {
		t.Errorf("band from vials = %v", xy)
	}
}

// TestAspect checks that non-square pixels keep the slice's shape in mm:
// 80×40 pixels of 1×2 mm are 80×80 mm, drawn square.
func TestAspect(t *testing.T) {
	v := &View{Quantity: "T1", Nx: 80, Ny: 40, PixelMM: [2]float64{1, 2}, Values: make([]float32, 80*40)}
	if sz := previewSize(v); sz.X != previewWidth || sz.Y != previewWidth {
		t.Errorf("80×40 pixels of 1×2 mm drawn %d×%d, want %d×%d", sz.X, sz.Y, previewWidth, previewWidth)
	}
	m, _, err := renderView(v)
	if err != nil {
		t.Fatal(err)
	}
	cfg, err := png.DecodeConfig(bytes.NewReader(m))
	if err != nil || cfg.Width != previewWidth || cfg.Height != previewWidth {
		t.Errorf("rendered %dx%d (%v)", cfg.Width, cfg.Height, err)
	}
}

// TestWarnVerdict: a passing vial using 90 % of its tolerance, and one
// flagged by its history, are shown as warn, named in the headline with
// deviation and tolerance in % and ms; WarnFraction < 0 switches the
// fraction rule off.
func TestWarnVerdict(t *testing.T) {
	p := testPage(false)
	var near, flagged *phantom.VialQA
	for i := range p.QA.Vials {
		r := &p.QA.Vials[i]
		if r.Verdict != phantom.Pass || !(r.Tolerance > 0) {
			continue
		}
		switch {
		case near == nil:
			near = r
		case flagged == nil:
			flagged = r
		}
	}
	near.Median = near.Reference + 0.9*near.Tolerance
	near.Deviation = 100 * (near.Median - near.Reference) / near.Reference
	p.History = map[string]string{HistoryKey(flagged.ID, flagged.Quantity): "drift −4.0 %/yr"}
	var b bytes.Buffer
	if err := Render(&b, p); err != nil {
		t.Fatal(err)
	}
	s := b.String()
	for _, want := range []string{
		"16 of 20 vial measurements passed, 2 warn, 1 failed, 1 not measured",
		"Warn: " + near.ID + " " + near.Quantity + " &#43;" + fmt.Sprintf("%.1f", near.Deviation),
		"90 % of the tolerance used",
		"history: drift −4.0 %/yr",
		`<td class="v-warn"><span class="mark">!</span>warn</td>`,
	} {
		if !strings.Contains(s, want) {
			t.Errorf("report lacks %q", want)
		}
	}
	if strings.Count(s, `class="v-warn"`) != 2 {
		t.Errorf("%d warn rows, want 2", strings.Count(s, `class="v-warn"`))
	}
	p.WarnFraction = -1
	b.Reset()
	if err := Render(&b, p); err != nil {
		t.Fatal(err)
	}
	if n := strings.Count(b.String(), `class="v-warn"`); n != 1 {
		t.Errorf("with the fraction rule off: %d warn rows, want 1 (the history flag)", n)
	}
}
