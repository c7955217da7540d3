package sidecar

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"regexp"
	"strconv"
	"strings"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/internal/regular"
	"github.com/tauvox/tauvox/volume"
)

// MaxSize is the largest sidecar Read accepts, in bytes. Sidecars are a
// few KiB; the cap keeps a wrong file name from loading something huge.
const MaxSize = 16 << 20

// Plausibility limits, in the BIDS units (seconds, degrees, tesla). A time
// above its limit is read as a value written in milliseconds by mistake (a
// common converter mistake). The limits are common practice: the echo
// times of relaxometry series stay well below 1 s (the last echoes of a
// long CPMG train reach a few hundred ms), inversion times up to about 10 s
// and repetition times up to about 20 s. BIDS allows flip angles up to
// 360°; no model tauvox fits uses one above 180°.
const (
	maxEchoTime       = 1   // s
	maxInversionTime  = 30  // s
	maxRepetitionTime = 60  // s
	maxFlipAngle      = 180 // degrees
	maxField          = 30  // T; the strongest MR magnets are about 21 T
)

// LooksLikeRadians reports whether flip angles given in degrees look like
// radians: every angle at most π and one below 1° (no relaxometry sequence
// excites below 1°, while 1 rad is 57°; common practice).
func LooksLikeRadians(fa []float64) bool {
	small := false
	for _, x := range fa {
		if !(x > 0) || x > math.Pi+1e-9 {
			return false
		}
		small = small || x < 1
	}
	return small
}

// Degrees converts flip angles from radians to degrees, rounded to 0.1°
// (for a message saying what was probably meant).
func Degrees(rad []float64) []float64 {
	d := make([]float64, len(rad))
	for i, x := range rad {
		d[i] = math.Round(x*1800/math.Pi) / 10
	}
	return d
}

// FormatList writes values as a comma-separated list (%g of each times
// scale, at most 6 significant digits), shortened to the first three,
// "…" and the last when there are more than six.
func FormatList(v []float64, scale float64) string {
	f := func(x float64) string { return strconv.FormatFloat(x*scale, 'g', 6, 64) }
	var parts []string
	if len(v) > 6 {
		parts = []string{f(v[0]), f(v[1]), f(v[2]), "…", f(v[len(v)-1])}
	} else {
		for _, x := range v {
			parts = append(parts, f(x))
		}
	}
	return strings.Join(parts, ",")
}

// Sidecar holds the parameters tauvox uses from a BIDS JSON sidecar, with
// times converted to milliseconds. A per-volume parameter is nil when the
// key is absent, holds one value when the file gives a number, and one
// value per volume when it gives a list. Scalars are NaN when absent and
// strings empty.
type Sidecar struct {
	Path string // file read

	EchoTime                 []float64 // TE, ms
	InversionTime            []float64 // TI, ms
	RepetitionTime           []float64 // TR, ms (BIDS defines a number; a list is accepted for variable-TR series)
	RepetitionTimeExcitation []float64 // TR between excitations, ms
	FlipAngle                []float64 // nominal flip angle, degrees

	MagneticFieldStrength float64 // B0, tesla; NaN when absent

	Manufacturer           string
	ManufacturersModelName string
	StationName            string
	SeriesDescription      string
	// AcquisitionDateTime is "YYYY-MM-DDThh:mm:ss[.f]" (with the zone when
	// the file gives one), from AcquisitionDateTime or from AcquisitionDate
	// and AcquisitionTime; empty when unknown or when only a time is given.
	AcquisitionDateTime string

	list map[string]bool // keys given as JSON lists
}

// Error reports a sidecar that cannot be read or holds a bad value. Its
// text is "path: key: reason", or "path: reason" when Key is empty.
type Error struct {
	Path   string
	Key    string
	Reason string
	Err    error // underlying cause, or nil
}

func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(output.Line(e.Path))
	b.WriteString(": ")
	if e.Key != "" {
		b.WriteString(output.Line(e.Key))
		b.WriteString(": ")
	}
	b.WriteString(output.Line(e.Reason))
	if e.Err != nil {
		b.WriteString(": ")
		b.WriteString(output.Line(e.Err.Error()))
	}
	return b.String()
}

// Unwrap returns the underlying cause, or nil.
func (e *Error) Unwrap() error { return e.Err }

// Read reads and checks the sidecar at path.
func Read(path string) (*Sidecar, error) {
	f, err := regular.Open(path)
	if err != nil {
		var nr *regular.NotRegularError
		if errors.As(err, &nr) {
			return nil, &Error{Path: path, Reason: "is a " + nr.Kind + ", not a sidecar file"}
		}
		var pe *os.PathError
		if errors.As(err, &pe) {
			return nil, &Error{Path: path, Reason: "cannot open", Err: pe.Err}
		}
		return nil, &Error{Path: path, Reason: "cannot open", Err: err}
	}
	defer f.Close()
	b, err := io.ReadAll(io.LimitReader(f, MaxSize+1))
	if err != nil {
		return nil, &Error{Path: path, Reason: "cannot read", Err: err}
	}
	if len(b) > MaxSize {
		return nil, &Error{Path: path, Reason: fmt.Sprintf("larger than %d bytes; not a sidecar", MaxSize)}
	}
	return Parse(b, path)
}

// Parse decodes sidecar JSON held in memory; path is used in errors and
// stored in the result.
func Parse(b []byte, path string) (*Sidecar, error) {
	var raw map[string]json.RawMessage
	dec := json.NewDecoder(bytes.NewReader(b))
	if err := dec.Decode(&raw); err != nil {
		var te *json.UnmarshalTypeError
		if errors.As(err, &te) && te.Field == "" {
			return nil, &Error{Path: path, Reason: "not a JSON object"}
		}
		return nil, &Error{Path: path, Reason: "invalid JSON", Err: err}
	}
	if raw == nil {
		return nil, &Error{Path: path, Reason: "not a JSON object"}
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, &Error{Path: path, Reason: "invalid JSON: data after the top-level object"}
	}
	s := &Sidecar{Path: path, MagneticFieldStrength: math.NaN(), list: map[string]bool{}}
	times := []struct {
		key string
		dst *[]float64
		max float64
		pos bool // must be > 0 (else ≥ 0)
	}{
		{"EchoTime", &s.EchoTime, maxEchoTime, true},
		{"InversionTime", &s.InversionTime, maxInversionTime, false},
		{"RepetitionTime", &s.RepetitionTime, maxRepetitionTime, true},
		{"RepetitionTimeExcitation", &s.RepetitionTimeExcitation, maxRepetitionTime, true},
	}
	for _, f := range times {
		v, isList, err := numbers(raw, f.key)
		if err != nil {
			return nil, s.err(f.key, err.Error())
		}
		for _, x := range v {
			switch {
			case x < 0 || (f.pos && x == 0):
				return nil, s.err(f.key, fmt.Sprintf("%g s is not a valid time", x))
			case x > f.max:
				return nil, s.err(f.key, fmt.Sprintf("%g s is implausibly long (above %g s); sidecar times are in seconds (BIDS): was %g ms (%s s) meant?", x, f.max, x, strconv.FormatFloat(x/1000, 'g', 6, 64)))
			}
		}
		for i := range v {
			v[i] *= 1000 // s → ms
		}
		*f.dst = v
		s.list[f.key] = isList
	}
	fa, isList, err := numbers(raw, "FlipAngle")
	if err != nil {
		return nil, s.err("FlipAngle", err.Error())
	}
	for _, x := range fa {
		if !(x > 0 && x <= maxFlipAngle) {
			return nil, s.err("FlipAngle", fmt.Sprintf("%g degrees is outside (0, 180]; sidecar flip angles are in degrees (BIDS)", x))
		}
	}
	if LooksLikeRadians(fa) {
		return nil, s.err("FlipAngle", fmt.Sprintf("%s look like radians; sidecar flip angles are in degrees (BIDS): was %s° meant?", FormatList(fa, 1), FormatList(Degrees(fa), 1)))
	}
	s.FlipAngle, s.list["FlipAngle"] = fa, isList

	b0, isList, err := numbers(raw, "MagneticFieldStrength")
	switch {
	case err != nil:
		return nil, s.err("MagneticFieldStrength", err.Error())
	case isList:
		return nil, s.err("MagneticFieldStrength", "expected a number")
	case len(b0) == 1:
		if !(b0[0] > 0 && b0[0] <= maxField) {
			return nil, s.err("MagneticFieldStrength", fmt.Sprintf("%g T is not a plausible field strength", b0[0]))
		}
		s.MagneticFieldStrength = b0[0]
	}

	texts := []struct {
		key string
		dst *string
	}{
		{"Manufacturer", &s.Manufacturer},
		{"ManufacturersModelName", &s.ManufacturersModelName},
		{"StationName", &s.StationName},
		{"SeriesDescription", &s.SeriesDescription},
	}
	for _, f := range texts {
		v, err := text(raw, f.key)
		if err != nil {
			return nil, s.err(f.key, err.Error())
		}
		*f.dst = v
	}
	if err := s.dateTime(raw); err != nil {
		return nil, err
	}
	return s, nil
}

func (s *Sidecar) err(key, reason string) error {
	return &Error{Path: s.Path, Key: key, Reason: reason}
}

// numbers decodes a key holding a number or a non-empty list of numbers;
// absent and null give nil. JSON has no NaN or Inf; a number too large for
// float64 is an error.
func numbers(raw map[string]json.RawMessage, key string) (v []float64, isList bool, err error) {
	m, ok := raw[key]
	if !ok {
		return nil, false, nil
	}
	m = bytes.TrimSpace(m)
	if bytes.Equal(m, []byte("null")) {
		return nil, false, nil
	}
	bad := errors.New("expected a number or a list of numbers")
	if len(m) > 0 && m[0] == '[' {
		var list []json.RawMessage
		if err := json.Unmarshal(m, &list); err != nil {
			return nil, true, bad
		}
		if len(list) == 0 {
			return nil, true, errors.New("empty list")
		}
		v = make([]float64, len(list))
		for i, e := range list {
			if err := json.Unmarshal(e, &v[i]); err != nil || !isNumber(e) {
				return nil, true, fmt.Errorf("item %d: expected a number", i+1)
			}
		}
		return v, true, nil
	}
	var x float64
	if err := json.Unmarshal(m, &x); err != nil || !isNumber(m) {
		return nil, false, bad
	}
	return []float64{x}, false, nil
}

// isNumber reports whether a raw JSON value is a number literal (not null,
// which json.Unmarshal accepts into a float64 as a no-op).
func isNumber(m json.RawMessage) bool {
	m = bytes.TrimSpace(m)
	return len(m) > 0 && (m[0] == '-' || (m[0] >= '0' && m[0] <= '9'))
}

func text(raw map[string]json.RawMessage, key string) (string, error) {
	m, ok := raw[key]
	if !ok || bytes.Equal(bytes.TrimSpace(m), []byte("null")) {
		return "", nil
	}
	var v string
	if err := json.Unmarshal(m, &v); err != nil {
		return "", errors.New("expected a string")
	}
	return v, nil
}

// Date and time forms of BIDS (ISO 8601, as DICOM DT/DA/TM converted by
// BIDS tools): the time may carry a fraction and the date-time a zone.
var (
	reDateTime = regexp.MustCompile(`^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}(\.\d+)?(Z|[+-]\d{2}:\d{2})?$`)
	reDate     = regexp.MustCompile(`^\d{4}-\d{2}-\d{2}$`)
	reTime     = regexp.MustCompile(`^\d{2}:\d{2}:\d{2}(\.\d+)?$`)
)

func (s *Sidecar) dateTime(raw map[string]json.RawMessage) error {
	dt, err := text(raw, "AcquisitionDateTime")
	if err != nil {
		return s.err("AcquisitionDateTime", err.Error())
	}
	if dt != "" {
		if !reDateTime.MatchString(dt) || !validClock(dt[:10], dt[11:19]) {
			return s.err("AcquisitionDateTime", fmt.Sprintf("%q is not a date-time like 2024-05-01T10:20:30", dt))
		}
		s.AcquisitionDateTime = dt
		return nil
	}
	d, err := text(raw, "AcquisitionDate")
	if err != nil {
		return s.err("AcquisitionDate", err.Error())
	}
	tm, err := text(raw, "AcquisitionTime")
	if err != nil {
		return s.err("AcquisitionTime", err.Error())
	}
	if d != "" && (!reDate.MatchString(d) || !validClock(d, "00:00:00")) {
		return s.err("AcquisitionDate", fmt.Sprintf("%q is not a date like 2024-05-01", d))
	}
	if tm != "" && (!reTime.MatchString(tm) || !validClock("2000-01-01", tm[:8])) {
		return s.err("AcquisitionTime", fmt.Sprintf("%q is not a time like 10:20:30", tm))
	}
	if d != "" && tm != "" {
		s.AcquisitionDateTime = d + "T" + tm
	}
	return nil
}

// validClock checks the ranges of a date and a time (leap seconds
// allowed).
func validClock(date, clock string) bool {
	var y, mo, d, h, mi, sec int
	if _, err := fmt.Sscanf(date+" "+clock, "%4d-%2d-%2d %2d:%2d:%2d", &y, &mo, &d, &h, &mi, &sec); err != nil {
		return false
	}
	days := [13]int{0, 31, 29, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31}
	return mo >= 1 && mo <= 12 && d >= 1 && d <= days[mo] && h <= 23 && mi <= 59 && sec <= 60
}

// EffectiveRepetitionTime returns the repetition time that governs
// longitudinal recovery between excitations: RepetitionTimeExcitation when
// the sidecar has it (BIDS: the TR of the excitation train, as in VFA and
// MP2RAGE collections), else RepetitionTime; nil when neither is present.
func (s *Sidecar) EffectiveRepetitionTime() (values []float64, key string) {
	if s.RepetitionTimeExcitation != nil {
		return s.RepetitionTimeExcitation, "RepetitionTimeExcitation"
	}
	if s.RepetitionTime != nil {
		return s.RepetitionTime, "RepetitionTime"
	}
	return nil, ""
}

// Acquisitions returns one Acquisition per volume of an image with nt
// volumes. A parameter given as a number applies to every volume, a list
// must have exactly nt values, and a missing parameter is NaN. The
// repetition time is EffectiveRepetitionTime.
func (s *Sidecar) Acquisitions(nt int) ([]volume.Acquisition, error) {
	if nt < 1 {
		return nil, &Error{Path: s.Path, Reason: fmt.Sprintf("%d volumes requested", nt)}
	}
	acq := make([]volume.Acquisition, nt)
	for i := range acq {
		acq[i] = volume.Unknown()
	}
	tr, trKey := s.EffectiveRepetitionTime()
	fields := []struct {
		key string
		v   []float64
		set func(a *volume.Acquisition, x float64)
	}{
		{"EchoTime", s.EchoTime, func(a *volume.Acquisition, x float64) { a.EchoTime = x }},
		{"InversionTime", s.InversionTime, func(a *volume.Acquisition, x float64) { a.InversionTime = x }},
		{trKey, tr, func(a *volume.Acquisition, x float64) { a.RepetitionTime = x }},
		{"FlipAngle", s.FlipAngle, func(a *volume.Acquisition, x float64) { a.FlipAngle = x }},
	}
	for _, f := range fields {
		switch {
		case f.v == nil:
		case len(f.v) == 1 && !s.list[f.key]:
			for i := range acq {
				f.set(&acq[i], f.v[0])
			}
		case len(f.v) == nt:
			for i := range acq {
				f.set(&acq[i], f.v[i])
			}
		default:
			return nil, s.err(f.key, fmt.Sprintf("lists %d %s but the image has %d %s", len(f.v), plural(len(f.v), "value"), nt, plural(nt, "volume")))
		}
	}
	return acq, nil
}

func plural(n int, word string) string {
	if n == 1 {
		return word
	}
	return word + "s"
}

// ApplySource copies what the sidecar knows about the session into src:
// field strength, scanner (StationName, else Manufacturer and model),
// acquisition date-time and series description. Fields the sidecar lacks
// are left as they were.
func (s *Sidecar) ApplySource(src *volume.Source) {
	if !math.IsNaN(s.MagneticFieldStrength) {
		src.FieldStrength = s.MagneticFieldStrength
	}
	switch {
	case s.StationName != "":
		src.Scanner = s.StationName
	case s.Manufacturer != "" || s.ManufacturersModelName != "":
		src.Scanner = strings.TrimSpace(s.Manufacturer + " " + s.ManufacturersModelName)
	}
	if s.AcquisitionDateTime != "" {
		src.AcquiredAt = s.AcquisitionDateTime
	}
	if s.SeriesDescription != "" {
		src.Description = s.SeriesDescription
	}
}

// ForImage returns the sidecar path of a NIfTI image, x.json for x.nii,
// x.nii.gz, x.hdr or x.img (case-insensitive extension), and whether
// something other than a folder stands there. A FIFO or device counts, so
// that Read refuses it by name instead of the sidecar seeming absent.
func ForImage(niftiPath string) (string, bool) {
	base := niftiPath
	lower := strings.ToLower(base)
	for _, ext := range []string{".nii.gz", ".nii", ".hdr.gz", ".hdr", ".img.gz", ".img"} {
		if strings.HasSuffix(lower, ext) {
			base = base[:len(base)-len(ext)]
			break
		}
	}
	p := base + ".json"
	fi, err := os.Stat(p)
	return p, err == nil && !fi.IsDir()
}

// Keys returns the BIDS acquisition keys of a protocol for a sidecar
// (BIDS common metadata: EchoTime, InversionTime and RepetitionTime in
// seconds, FlipAngle in degrees; check-values §3.6): a number when every
// volume has the same value, a list when it varies, left out when any
// volume's value is unknown; MagneticFieldStrength (T) when field > 0.
func Keys(acq []volume.Acquisition, field float64) map[string]any {
	out := map[string]any{}
	// div converts ms to s by division, not by multiplying with 1e-3: the
	// division is correctly rounded, so 700 ms is written 0.7, not
	// 0.7000000000000001 (and 0.7 s reads back as exactly 700 ms).
	put := func(key string, div float64, get func(volume.Acquisition) float64) {
		var vals []float64
		same := true
		for _, a := range acq {
			v := get(a)
			if math.IsNaN(v) {
				return
			}
			vals = append(vals, v/div)
			same = same && v == get(acq[0])
		}
		switch {
		case len(vals) == 0:
		case same:
			out[key] = vals[0]
		default:
			out[key] = vals
		}
	}
	put("EchoTime", 1000, func(a volume.Acquisition) float64 { return a.EchoTime })
	put("InversionTime", 1000, func(a volume.Acquisition) float64 { return a.InversionTime })
	put("RepetitionTime", 1000, func(a volume.Acquisition) float64 { return a.RepetitionTime })
	put("FlipAngle", 1, func(a volume.Acquisition) float64 { return a.FlipAngle })
	if field > 0 {
		out["MagneticFieldStrength"] = field
	}
	return out
}
