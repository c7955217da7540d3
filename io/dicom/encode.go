package dicom

import (
	"encoding/binary"
	"math"
	"sort"
	"strconv"
	"strings"
)

// dataset collects explicit VR little endian elements (PS3.5 §7.1.2) and
// writes them in ascending tag order, as PS3.5 §7.1 requires.
type dataset struct {
	elems []element
}

type element struct {
	tag uint32
	b   []byte // the whole encoded element
}

// put appends an element with value v (padded to even length: UI and
// binary values with 0x00, text with a space, PS3.5 §6.2).
func (d *dataset) put(tag uint32, vr string, v []byte) {
	if len(v)%2 == 1 {
		pad := byte(' ')
		switch vr {
		case "UI", "OB", "OW", "UN":
			pad = 0
		}
		v = append(v, pad)
	}
	var b []byte
	b = binary.LittleEndian.AppendUint16(b, uint16(tag>>16))
	b = binary.LittleEndian.AppendUint16(b, uint16(tag))
	b = append(b, vr...)
	if longVR(vr) {
		b = append(b, 0, 0)
		b = binary.LittleEndian.AppendUint32(b, uint32(len(v)))
	} else {
		b = binary.LittleEndian.AppendUint16(b, uint16(len(v)))
	}
	d.elems = append(d.elems, element{tag, append(b, v...)})
}

func (d *dataset) str(tag uint32, vr string, s ...string) {
	d.put(tag, vr, []byte(strings.Join(s, `\`)))
}

// ds writes decimal strings; NaN writes an empty (type 2) value.
func (d *dataset) ds(tag uint32, v ...float64) {
	s := make([]string, 0, len(v))
	for _, x := range v {
		if math.IsNaN(x) {
			d.put(tag, "DS", nil)
			return
		}
		s = append(s, formatDS(x))
	}
	d.str(tag, "DS", s...)
}

func (d *dataset) is(tag uint32, v ...int) {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = strconv.Itoa(x)
	}
	d.str(tag, "IS", s...)
}

func (d *dataset) us(tag uint32, v uint16) {
	d.put(tag, "US", binary.LittleEndian.AppendUint16(nil, v))
}

func (d *dataset) ul(tag uint32, v ...uint32) {
	var b []byte
	for _, x := range v {
		b = binary.LittleEndian.AppendUint32(b, x)
	}
	d.put(tag, "UL", b)
}

func (d *dataset) at(tag uint32, v uint32) {
	b := binary.LittleEndian.AppendUint16(nil, uint16(v>>16))
	d.put(tag, "AT", binary.LittleEndian.AppendUint16(b, uint16(v)))
}

func (d *dataset) fd(tag uint32, v ...float64) {
	var b []byte
	for _, x := range v {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(x))
	}
	d.put(tag, "FD", b)
}

// seq writes a sequence of defined length with items of defined length.
func (d *dataset) seq(tag uint32, items ...*dataset) {
	var v []byte
	for _, it := range items {
		body := it.bytes()
		v = append(v, 0xFE, 0xFF, 0x00, 0xE0)
		v = binary.LittleEndian.AppendUint32(v, uint32(len(body)))
		v = append(v, body...)
	}
	d.put(tag, "SQ", v)
}

func (d *dataset) bytes() []byte {
	sort.SliceStable(d.elems, func(a, b int) bool { return d.elems[a].tag < d.elems[b].tag })
	n := 0
	for _, e := range d.elems {
		n += len(e.b)
	}
	out := make([]byte, 0, n)
	for _, e := range d.elems {
		out = append(out, e.b...)
	}
	return out
}

// formatDS formats v as a decimal string of at most 16 characters
// (PS3.5 Table 6.2-1), with as many significant digits as fit.
func formatDS(v float64) string {
	v += 0 // no "-0"
	s := strconv.FormatFloat(v, 'g', -1, 64)
	for p := 15; len(s) > 16 && p > 0; p-- {
		s = strconv.FormatFloat(v, 'g', p, 64)
	}
	return s
}

// parseDS reads back a value written by formatDS.
func parseDS(s string) float64 {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return math.NaN()
	}
	return v
}
