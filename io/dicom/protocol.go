package dicom

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/tauvox/tauvox/volume"
)

// Protocol is one relaxation series acquired as several DICOM series (one
// per inversion time, flip angle, echo time or repetition time, as many
// scanners export them): series on one grid — frame of reference,
// orientation, matrix, pixel spacing and slice positions — that differ in
// exactly one acquisition parameter. Scan finds them (Catalog.Protocols);
// Join makes one from series named by the user.
type Protocol struct {
	// ID is "p" + the lowest series number + "-" + six hex digits of a
	// hash of the joined series' IDs, e.g. "p3-0c41d2".
	ID string `json:"id"`
	// Series are the IDs of the joined series, in the order of Values.
	Series      []string  `json:"series"`
	Description string    `json:"description"`
	Varying     string    `json:"varying"` // the parameter that differs between the series
	Values      []float64 `json:"values"`  // its values, ascending (ms or degrees)
	Echo        string    `json:"echo"`    // echo series: "SE" or "GR" when the headers tell (see Series.Echo)
	Rows        int       `json:"rows"`
	Columns     int       `json:"columns"`
	Slices      int       `json:"slices"`
	Volumes     int       `json:"volumes"`
	// Problem is why the series cannot be joined ("" when they can).
	Problem string `json:"problem,omitempty"`

	members []*Series
	err     error
}

// Err returns why the protocol cannot be loaded, or nil.
func (p *Protocol) Err() error { return p.err }

// Members returns the joined series.
func (p *Protocol) Members() []*Series { return p.members }

// Paths returns the files of every joined series, sorted, each once.
func (p *Protocol) Paths() []string {
	var out []string
	for _, s := range p.members {
		out = append(out, s.Paths()...)
	}
	sort.Strings(out)
	return out
}

// param is one acquisition parameter as protocols compare it.
type param struct {
	name, unit string
	get        func(volume.Acquisition) float64
}

var params = []param{
	{"InversionTime", "ms", func(a volume.Acquisition) float64 { return a.InversionTime }},
	{"FlipAngle", "°", func(a volume.Acquisition) float64 { return a.FlipAngle }},
	{"EchoTime", "ms", func(a volume.Acquisition) float64 { return a.EchoTime }},
	{"RepetitionTime", "ms", func(a volume.Acquisition) float64 { return a.RepetitionTime }},
}

func (p param) format(v float64) string {
	if p.unit == "°" {
		return strconv.FormatFloat(v, 'g', -1, 64) + "°"
	}
	return strconv.FormatFloat(v, 'g', -1, 64) + " " + p.unit
}

// protocolKey is what series must share before their grids are compared:
// frame of reference, orientation, matrix, image type, slice count, pixel
// spacing and whether an inversion time is given (an inversion recovery
// and a gradient echo protocol of one grid stay apart).
func protocolKey(s *Series) string {
	f := s.frames[0]
	hasTI := !math.IsNaN(f.ti)
	return fmt.Sprintf("%s|%s|%d|%.4f,%.4f|%t", f.file.frameOfRef, s.key, s.lay.nz, f.spacing[0], f.spacing[1], hasTI)
}

// sameGrid returns "" when a and b lie on one grid: the eight corners of
// their voxel grids agree within the position tolerance of both, else
// what differs.
func sameGrid(a, b *Series) string {
	la, lb := a.lay, b.lay
	fa, fb := a.frames[0].file, b.frames[0].file
	switch {
	case fa.frameOfRef != "" && fb.frameOfRef != "" && fa.frameOfRef != fb.frameOfRef:
		return fmt.Sprintf("FrameOfReferenceUID %s differs from %s", fb.frameOfRef, fa.frameOfRef)
	case la.nx != lb.nx || la.ny != lb.ny:
		return fmt.Sprintf("matrix %d×%d (Columns×Rows) differs from %d×%d", lb.nx, lb.ny, la.nx, la.ny)
	case la.nz != lb.nz:
		return fmt.Sprintf("%d slices differ from %d", lb.nz, la.nz)
	}
	tol := math.Max(la.tol, lb.tol)
	worst := 0.0
	for c := 0; c < 8; c++ {
		v := [3]float64{float64((c & 1) * (la.nx - 1)), float64((c >> 1 & 1) * (la.ny - 1)), float64((c >> 2 & 1) * (la.nz - 1))}
		var pa, pb [3]float64
		for r := 0; r < 3; r++ {
			pa[r] = la.affine[r][3] + la.affine[r][0]*v[0] + la.affine[r][1]*v[1] + la.affine[r][2]*v[2]
			pb[r] = lb.affine[r][3] + lb.affine[r][0]*v[0] + lb.affine[r][1]*v[1] + lb.affine[r][2]*v[2]
		}
		worst = math.Max(worst, dist(pa, pb))
	}
	if worst > tol {
		return fmt.Sprintf("grid is %.3g mm away from that of the other series (orientation, spacing or slice positions differ; tolerance %.3g mm)", worst, tol)
	}
	return ""
}

// protocols finds the protocols among the loadable series of c.
func (c *Catalog) protocols() {
	groups := map[string][][]*Series{}
	var keys []string
	for _, s := range c.Series {
		if s.err != nil || s.lay == nil {
			continue
		}
		k := protocolKey(s)
		if _, ok := groups[k]; !ok {
			keys = append(keys, k)
		}
		placed := false
		for i, g := range groups[k] {
			if sameGrid(g[0], s) == "" {
				groups[k][i] = append(g, s)
				placed = true
				break
			}
		}
		if !placed {
			groups[k] = append(groups[k], []*Series{s})
		}
	}
	for _, k := range keys {
		for _, g := range groups[k] {
			if len(g) < 2 {
				continue
			}
			// Series on one grid with the same parameters (a repeated
			// scan) are not a protocol; Join still says why.
			if p := makeProtocol(g); p.Varying != "" {
				c.Protocols = append(c.Protocols, p)
			}
		}
	}
}

// Join makes a protocol of the series named by ids (see Lookup). The
// error names the series and what keeps them apart: another grid, a
// repeated value, a second parameter that differs.
func (c *Catalog) Join(ids []string) (*Protocol, error) {
	if len(ids) < 2 {
		return nil, fmt.Errorf("dicom: joining needs at least two series (got %d)", len(ids))
	}
	var list []*Series
	seen := map[*Series]bool{}
	for _, id := range ids {
		s, err := c.Lookup(strings.TrimSpace(id))
		if err != nil {
			return nil, err
		}
		if seen[s] {
			return nil, fmt.Errorf("dicom: series %s is named twice", s.ID)
		}
		seen[s] = true
		if s.err != nil {
			return nil, s.err
		}
		list = append(list, s)
	}
	p := makeProtocol(list)
	return p, p.err
}

// makeProtocol checks that the series lie on one grid and differ in
// exactly one parameter, with no value repeated, and orders them by it.
func makeProtocol(list []*Series) *Protocol {
	p := &Protocol{members: list}
	ids := make([]string, len(list))
	low := list[0].Number
	for i, s := range list {
		ids[i] = s.ID
		low = min(low, s.Number)
	}
	sorted := append([]string(nil), ids...)
	sort.Strings(sorted)
	h := sha256.Sum256([]byte(strings.Join(sorted, "+")))
	p.ID = "p" + strconv.Itoa(low) + "-" + hex.EncodeToString(h[:3])
	s0 := list[0]
	p.Rows, p.Columns, p.Slices = s0.Rows, s0.Columns, s0.Slices
	fail := func(path, format string, a ...any) *Protocol {
		p.err = &SeriesError{Path: path, Series: p.ID, Reason: fmt.Sprintf(format, a...), Err: ErrIncomplete}
		p.Problem = p.err.Error()
		p.Series = ids
		return p
	}
	for _, s := range list[1:] {
		if why := sameGrid(s0, s); why != "" {
			return fail(s.Source.Path, "series %s cannot join series %s: %s", s.ID, s0.ID, why)
		}
	}

	// The parameter that differs: the first (in volume.Varying's order)
	// whose values are not all equal over every volume of every series.
	type vol struct {
		s   *Series
		acq volume.Acquisition
	}
	var vols []vol
	for _, s := range list {
		for _, a := range s.lay.acq {
			vols = append(vols, vol{s, a})
		}
	}
	varies := func(pr param) bool {
		first := math.NaN()
		for _, v := range vols {
			x := pr.get(v.acq)
			if math.IsNaN(first) {
				first = x
			} else if quant(x) != quant(first) {
				return true
			}
		}
		return false
	}
	var by *param
	for i := range params {
		if varies(params[i]) {
			if by == nil {
				by = &params[i]
				continue
			}
			// A second parameter differs: name its values by series.
			p.Varying = by.name
			pr := params[i]
			var parts []string
			for _, s := range list {
				parts = append(parts, fmt.Sprintf("%s in %s", pr.format(pr.get(s.lay.acq[0])), s.ID))
			}
			return fail(s0.Source.Path, "the series differ in %s and also in %s, which must agree: %s", by.name, pr.name, strings.Join(parts, ", "))
		}
	}
	if by == nil {
		return fail(s0.Source.Path, "the series %s have the same acquisition parameters; nothing varies", strings.Join(ids, ", "))
	}
	p.Varying = by.name
	if p.Varying == "EchoTime" {
		p.Echo = echoKind(s0.frames[0].file)
	}
	owner := map[int64]*Series{}
	for _, v := range vols {
		x := by.get(v.acq)
		if math.IsNaN(x) {
			return fail(v.s.Source.Path, "series %s gives no %s", v.s.ID, by.name)
		}
		if o := owner[quant(x)]; o != nil {
			return fail(v.s.Source.Path, "%s %s is repeated: series %s and %s", by.name, by.format(x), o.ID, v.s.ID)
		}
		owner[quant(x)] = v.s
		p.Values = append(p.Values, x)
	}
	sort.Float64s(p.Values)
	sort.SliceStable(p.members, func(a, b int) bool {
		return by.get(p.members[a].lay.acq[0]) < by.get(p.members[b].lay.acq[0])
	})
	p.Series = nil
	for _, s := range p.members {
		p.Series = append(p.Series, s.ID)
	}
	p.Volumes = len(vols)
	p.Description = describeJoined(p.members)
	return p
}

// describeJoined names a protocol by its series descriptions: the common
// prefix of them and the count, or the first and the last.
func describeJoined(list []*Series) string {
	first := list[0].Description
	pre := first
	for _, s := range list[1:] {
		d := s.Description
		n := 0
		for n < len(pre) && n < len(d) && pre[n] == d[n] {
			n++
		}
		pre = pre[:n]
	}
	pre = strings.TrimRight(pre, " _-0123456789")
	if len(pre) >= 3 {
		return fmt.Sprintf("%s (%d series)", pre, len(list))
	}
	return fmt.Sprintf("%s … %s (%d series)", first, list[len(list)-1].Description, len(list))
}

// LoadProtocol reads every series of p and stacks their volumes in the
// order of the varying parameter. The grid (affine) is that of the first
// series; the others agree with it within the position tolerance (Scan
// and Join checked it).
func LoadProtocol(p *Protocol) (*volume.Image, error) {
	r, err := OpenProtocol(p)
	if err != nil {
		return nil, err
	}
	return r.Load()
}

// pixelNotes says how the pixel data of the protocol's series are stored
// and scaled, and warns as Series.pixelNotes does; scaling is judged over
// the whole protocol (a private scale that differs between its series is
// warned about).
func (p *Protocol) pixelNotes() (string, []string) {
	var frames []*frameInfo
	for _, m := range p.members {
		frames = append(frames, m.frames...)
	}
	// Scaling is judged over the whole protocol: a private scale
	// that differs between its series is warned about.
	how, _ := p.members[0].pixelNotes()
	if i := strings.Index(how, "; scaling: "); i >= 0 {
		how = how[:i]
	}
	scale, warns := scaling(frames)
	pixels := how + "; " + scale
	seen := map[string]bool{}
	var all []string
	for _, m := range p.members {
		_, w := m.pixelNotes()
		for _, x := range append(w, warns...) {
			if !seen[x] && !strings.HasPrefix(x, "the private scale slope") && !strings.HasPrefix(x, "Real World Value Mapping is present") {
				seen[x] = true
				all = append(all, x)
			}
		}
	}
	for _, x := range warns {
		if !seen[x] {
			seen[x] = true
			all = append(all, x)
		}
	}
	return pixels, all
}

// LookupProtocol returns the protocol with the given ID.
func (c *Catalog) LookupProtocol(id string) (*Protocol, bool) {
	for _, p := range c.Protocols {
		if p.ID == id {
			return p, true
		}
	}
	return nil, false
}
