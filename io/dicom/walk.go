package dicom

import (
	"bytes"
	"compress/flate"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"strings"

	"github.com/suyashkumar/dicom/pkg/tag"
	"github.com/suyashkumar/dicom/pkg/uid"

	"github.com/tauvox/tauvox/internal/regular"
)

// Transfer syntax UIDs (PS3.5 §10 and Annex A; values as in check-values
// §3.3 and the pydicom 2.3.1 UID dictionary).
const (
	tsImplicitLE = "1.2.840.10008.1.2"
	tsExplicitLE = "1.2.840.10008.1.2.1"
	tsDeflatedLE = "1.2.840.10008.1.2.1.99"
	tsExplicitBE = "1.2.840.10008.1.2.2"
)

// undefinedLength is the value length 0xFFFFFFFF of PS3.5 §7.1.
const undefinedLength = 0xFFFFFFFF

// firstChunk is the number of bytes read first from each file; MR headers
// of classic single-frame files are typically 2–8 KiB (common practice).
const firstChunk = 8 << 10

// maxDepth bounds the nesting of sequences; enhanced MR files use four
// levels (per-frame group, macro, code item, ...).
const maxDepth = 16

// errNotDICOM marks a file that does not look like DICOM at all.
var errNotDICOM = errors.New("not a DICOM file")

// errNeedMore asks the caller of walk to read more of the stream.
var errNeedMore = errors.New("need more bytes")

// syntax describes how the data set of a file is encoded.
type syntax struct {
	uid          string
	name         string
	bo           binary.ByteOrder
	implicit     bool
	deflate      bool
	encapsulated bool // pixel data in fragments (compressed)
}

// lookupSyntax maps a transfer syntax UID to its encoding. Compressed
// syntaxes known to the UID dictionary are explicit VR little endian with
// encapsulated pixel data (PS3.5 §A.4); an unknown UID is unsupported.
func lookupSyntax(ts string) (syntax, error) {
	switch ts {
	case tsImplicitLE:
		return syntax{uid: ts, name: "Implicit VR Little Endian", bo: binary.LittleEndian, implicit: true}, nil
	case tsExplicitLE:
		return syntax{uid: ts, name: "Explicit VR Little Endian", bo: binary.LittleEndian}, nil
	case tsDeflatedLE:
		return syntax{uid: ts, name: "Deflated Explicit VR Little Endian", bo: binary.LittleEndian, deflate: true}, nil
	case tsExplicitBE:
		return syntax{uid: ts, name: "Explicit VR Big Endian", bo: binary.BigEndian}, nil
	}
	info, err := uid.Lookup(ts)
	if err != nil || info.Type != uid.TypeTransferSyntax {
		return syntax{uid: ts, name: "unknown"}, fmt.Errorf("unknown transfer syntax %q", ts)
	}
	return syntax{uid: ts, name: info.Name, bo: binary.LittleEndian, encapsulated: true}, nil
}

// pixelElem locates the top-level pixel data element of a data set.
type pixelElem struct {
	found bool
	tag   uint32 // (7FE0,0010), (7FE0,0008) or (7FE0,0009)
	vr    string
	vl    uint32
	start int64 // offset of the element's tag in the data set stream
	value int64 // offset of its value
}

// rawFile is what the first pass knows about a file: how it is encoded
// and the bytes of its data set up to the pixel data.
type rawFile struct {
	path      string
	size      int64
	syn       syntax
	metaSOP   string // MediaStorageSOPClassUID
	dataStart int64  // offset of the data set in the file
	head      []byte // data set bytes (inflated when deflated) before the pixel data
	pix       pixelElem
}

// readHead reads the file at path up to its pixel data, checking every
// element length against the bytes that are there before anything is
// allocated for it. maxHead caps the bytes read.
func readHead(path string, maxHead int64) (*rawFile, error) {
	return readHeadInto(path, maxHead, nil)
}

// readHeadInto is readHead with scratch for the first chunk of the file
// when it is large enough (the file's head then shares it: the caller
// must be done with it before reusing scratch).
func readHeadInto(path string, maxHead int64, scratch []byte) (*rawFile, error) {
	f, st, err := regular.OpenInfo(path)
	if err != nil {
		if errors.Is(err, regular.ErrNotRegular) {
			return nil, err // skipped with a note by the scan, never opened blocking
		}
		return nil, &fileError{path, "open", err}
	}
	defer f.Close()
	return readHeadFrom(f, st.Size(), path, maxHead, scratch)
}

// readHeadFrom is readHead for the size bytes of f; path is used in
// messages.
func readHeadFrom(f io.ReaderAt, size int64, path string, maxHead int64, scratch []byte) (*rawFile, error) {
	rf := &rawFile{path: path, size: size}
	if rf.size == 0 {
		return nil, formatErr(path, "file is empty (0 bytes)", nil)
	}
	var buf []byte
	if n := min(rf.size, firstChunk); int64(cap(scratch)) >= n {
		buf = scratch[:n]
	} else {
		buf = make([]byte, n)
	}
	if _, err := io.ReadFull(io.NewSectionReader(f, 0, rf.size), buf); err != nil {
		return nil, &fileError{path, "read", err}
	}
	// fill makes buf hold at least n bytes of the file (or all of it).
	fill := func(n int64) error {
		if n <= int64(len(buf)) || int64(len(buf)) == rf.size {
			return nil
		}
		if n > maxHead {
			return unsupportedErr(path, fmt.Sprintf("header larger than %d bytes", maxHead), ErrTooLarge)
		}
		n = min(max(n, 2*int64(len(buf))), rf.size, maxHead)
		nb := make([]byte, n)
		copy(nb, buf)
		if _, err := io.ReadFull(io.NewSectionReader(f, int64(len(buf)), n-int64(len(buf))), nb[len(buf):]); err != nil {
			return &fileError{path, "read", err}
		}
		buf = nb
		return nil
	}

	var ts string
	var err error
	switch {
	case rf.size >= 132 && string(buf[128:132]) == "DICM":
		rf.dataStart, ts, rf.metaSOP, err = readMeta(path, buf, 132, fill, &buf)
	case len(buf) >= 8 && buf[0] == 0x02 && buf[1] == 0x00:
		rf.dataStart, ts, rf.metaSOP, err = readMeta(path, buf, 0, fill, &buf)
	case plausibleBare(buf):
		rf.dataStart = 0
	default:
		return nil, errNotDICOM
	}
	if err != nil {
		return nil, err
	}
	if ts == "" {
		ts = guessSyntax(buf[rf.dataStart:])
	}
	rf.syn, err = lookupSyntax(ts)
	if err != nil {
		return nil, unsupportedErr(path, err.Error(), nil)
	}

	if rf.syn.deflate {
		return rf, rf.inflateHead(f, maxHead)
	}
	total := rf.size - rf.dataStart
	for {
		w := walker{b: buf[rf.dataStart:], total: total, complete: int64(len(buf)) == rf.size,
			bo: rf.syn.bo, implicit: rf.syn.implicit, base: rf.dataStart, path: path}
		err := w.top()
		if err == errNeedMore {
			if err := fill(2 * int64(len(buf))); err != nil {
				return nil, err
			}
			continue
		}
		if err != nil {
			return nil, err
		}
		rf.pix = w.pix
		end := int64(len(w.b))
		if w.pix.found {
			end = w.pix.start
		}
		rf.head = w.cut(w.b, end)
		return rf, nil
	}
}

// inflateHead inflates the deflated data set (PS3.5 §A.5: raw deflate,
// RFC 1951) chunk by chunk until the pixel data element is reached.
func (rf *rawFile) inflateHead(f io.ReaderAt, maxHead int64) error {
	zr := flate.NewReader(io.NewSectionReader(f, rf.dataStart, rf.size-rf.dataStart))
	defer zr.Close()
	var b []byte
	complete := false
	chunk := int64(firstChunk)
	for {
		if !complete {
			if int64(len(b))+chunk > maxHead {
				chunk = maxHead - int64(len(b))
				if chunk <= 0 {
					return unsupportedErr(rf.path, fmt.Sprintf("inflated header larger than %d bytes", maxHead), ErrTooLarge)
				}
			}
			nb := make([]byte, int64(len(b))+chunk)
			copy(nb, b)
			n, err := io.ReadFull(zr, nb[len(b):])
			b = nb[:len(b)+n]
			if err == io.EOF || err == io.ErrUnexpectedEOF {
				complete = true
			} else if err != nil {
				return formatErr(rf.path, "deflated data set", err)
			}
			chunk *= 2
		}
		total := int64(-1)
		if complete {
			total = int64(len(b))
		}
		w := walker{b: b, total: total, complete: complete, bo: rf.syn.bo, path: rf.path, deflated: true}
		err := w.top()
		if err == errNeedMore {
			continue
		}
		if err != nil {
			return err
		}
		rf.pix = w.pix
		end := int64(len(b))
		if w.pix.found {
			end = w.pix.start
		}
		rf.head = w.cut(b, end)
		return nil
	}
}

// readMeta reads the File Meta Information (group 0002, always explicit
// VR little endian, PS3.10 §7.1) starting at off. It returns the offset of
// the data set, the transfer syntax and the media storage SOP class.
func readMeta(path string, buf []byte, off int64, fill func(int64) error, bp *[]byte) (int64, string, string, error) {
	var ts, sop string
	pos := off
	for {
		if err := fill(pos + 8); err != nil {
			return 0, "", "", err
		}
		buf = *bp
		if pos+8 > int64(len(buf)) {
			return 0, "", "", formatErr(path, fmt.Sprintf("truncated file meta information at byte %d", pos), io.ErrUnexpectedEOF)
		}
		group := binary.LittleEndian.Uint16(buf[pos:])
		if group != 0x0002 {
			return pos, ts, sop, nil
		}
		elem := binary.LittleEndian.Uint16(buf[pos+2:])
		vr := string(buf[pos+4 : pos+6])
		if !validVR(vr) {
			return 0, "", "", formatErr(path, fmt.Sprintf("invalid VR %q in file meta element (0002,%04X)", vr, elem), nil)
		}
		var vl, hdr int64
		if longVR(vr) {
			if err := fill(pos + 12); err != nil {
				return 0, "", "", err
			}
			buf = *bp
			if pos+12 > int64(len(buf)) {
				return 0, "", "", formatErr(path, fmt.Sprintf("truncated file meta information at byte %d", pos), io.ErrUnexpectedEOF)
			}
			vl, hdr = int64(binary.LittleEndian.Uint32(buf[pos+8:])), 12
		} else {
			vl, hdr = int64(binary.LittleEndian.Uint16(buf[pos+6:])), 8
		}
		if vl == undefinedLength || pos+hdr+vl-off > 1<<16 {
			return 0, "", "", formatErr(path, fmt.Sprintf("file meta element (0002,%04X) has an impossible length %d", elem, vl), nil)
		}
		if err := fill(pos + hdr + vl); err != nil {
			return 0, "", "", err
		}
		buf = *bp
		if pos+hdr+vl > int64(len(buf)) {
			return 0, "", "", formatErr(path, fmt.Sprintf("file meta element (0002,%04X) declares %d bytes but the file ends at byte %d", elem, vl, len(buf)), io.ErrUnexpectedEOF)
		}
		v := strings.TrimRight(string(buf[pos+hdr:pos+hdr+vl]), " \x00")
		switch elem {
		case 0x0002:
			sop = v
		case 0x0010:
			ts = v
		}
		pos += hdr + vl
	}
}

// plausibleBare reports whether b starts like a data set without
// preamble: a tag of group 0008 with a small element number and either a
// valid explicit VR or a 4-byte length that fits.
func plausibleBare(b []byte) bool {
	if len(b) < 8 || b[0] != 0x08 || b[1] != 0x00 {
		return false
	}
	elem := binary.LittleEndian.Uint16(b[2:])
	if elem > 0x1200 {
		return false
	}
	if validVR(string(b[4:6])) {
		return true
	}
	return int(binary.LittleEndian.Uint32(b[4:])) <= len(b)+1<<20
}

// guessSyntax picks explicit or implicit VR little endian for a data set
// without a stated transfer syntax by looking at its first element.
func guessSyntax(b []byte) string {
	if len(b) >= 6 && knownVR(string(b[4:6])) {
		return tsExplicitLE
	}
	return tsImplicitLE
}

func validVR(vr string) bool {
	return len(vr) == 2 && vr[0] >= 'A' && vr[0] <= 'Z' && vr[1] >= 'A' && vr[1] <= 'Z'
}

// longVR reports the VRs with a 2-byte reserved field and a 4-byte length
// in explicit VR encodings (PS3.5 Table 7.1-1, 2023 edition).
func longVR(vr string) bool {
	switch vr {
	case "OB", "OD", "OF", "OL", "OV", "OW", "SQ", "SV", "UC", "UN", "UR", "UT", "UV":
		return true
	}
	return false
}

func knownVR(vr string) bool {
	switch vr {
	case "AE", "AS", "AT", "CS", "DA", "DS", "DT", "FL", "FD", "IS", "LO", "LT", "PN", "SH", "SL", "SS", "ST", "TM", "UI", "UL", "US":
		return true
	}
	return longVR(vr)
}

// walker checks the element structure of a data set stream held in b:
// every length fits inside its item, its sequence and the stream; every
// element of a sequence is an item; nesting is bounded. It stops at the
// top-level pixel data element. The library parses only bytes that passed
// this walk, so no length taken from a file makes it allocate beyond the
// file's size.
type walker struct {
	b        []byte
	total    int64 // stream length when known, else -1
	complete bool  // b holds the whole stream
	bo       binary.ByteOrder
	implicit bool
	base     int64 // offset of b in the file, for messages
	path     string
	deflated bool
	pix      pixelElem
	// drop lists the top-level UN elements of undefined length (start and
	// end offsets): valid DICOM (PS3.5 §6.2.2) that the parsing library
	// cannot read, so they are cut from the bytes it is given.
	drop [][2]int64
}

func (w *walker) where() string {
	if w.deflated {
		return "the inflated data set ends"
	}
	return "the file ends"
}

func (w *walker) end() int64 {
	if w.total >= 0 {
		return w.total
	}
	return int64(len(w.b))
}

// need makes sure n bytes at pos are in b.
func (w *walker) need(pos, n int64, what string) error {
	if pos+n <= int64(len(w.b)) {
		return nil
	}
	if w.complete || (w.total >= 0 && pos+n > w.total) {
		return formatErr(w.path, fmt.Sprintf("truncated: %s at byte %d needs %d bytes but %s at byte %d",
			what, w.base+pos, n, w.where(), w.base+w.end()), io.ErrUnexpectedEOF)
	}
	return errNeedMore
}

// header reads an element header at pos: tag, VR, value length and the
// header's size.
func (w *walker) header(pos int64) (t tag.Tag, vr string, vl uint32, hdr int64, err error) {
	if err = w.need(pos, 8, "element header"); err != nil {
		return
	}
	b := w.b[pos:]
	t = tag.Tag{Group: w.bo.Uint16(b), Element: w.bo.Uint16(b[2:])}
	if t.Group == 0xFFFE || w.implicit {
		// Items and delimiters have no VR in any syntax (PS3.5 §7.5).
		vl, hdr = w.bo.Uint32(b[4:]), 8
		if t.Group == 0xFFFE {
			return t, "", vl, hdr, nil
		}
		vr = "UN"
		if t.Group == 0x7FE0 && t.Element == 0x0010 {
			vr = "OW"
		} else if info, e := tag.Find(t); e == nil && len(info.VRs) > 0 {
			vr = info.VRs[0]
		}
		return t, vr, vl, hdr, nil
	}
	vr = string(b[4:6])
	if !validVR(vr) {
		return t, vr, 0, 0, formatErr(w.path, fmt.Sprintf("invalid VR %q in element %s at byte %d", vr, tagString(t), w.base+pos), nil)
	}
	if longVR(vr) {
		if err = w.need(pos, 12, "element header"); err != nil {
			return
		}
		return t, vr, w.bo.Uint32(b[8:]), 12, nil
	}
	vl = uint32(w.bo.Uint16(b[6:]))
	return t, vr, vl, 8, nil
}

func tagString(t tag.Tag) string { return fmt.Sprintf("(%04X,%04X)", t.Group, t.Element) }

// top walks the top-level elements until the pixel data or the end.
func (w *walker) top() error {
	var pos int64
	for {
		if pos >= int64(len(w.b)) && (w.complete || (w.total >= 0 && pos >= w.total)) {
			return nil
		}
		t, vr, vl, hdr, err := w.header(pos)
		if err != nil {
			return err
		}
		if t.Group == 0xFFFE {
			return formatErr(w.path, fmt.Sprintf("item tag %s outside a sequence at byte %d", tagString(t), w.base+pos), nil)
		}
		if t.Group == 0x7FE0 && (t.Element == 0x0010 || t.Element == 0x0008 || t.Element == 0x0009) {
			w.pix = pixelElem{found: true, tag: t.Uint32(), vr: vr, vl: vl, start: pos, value: pos + hdr}
			if vl != undefinedLength && w.total >= 0 && pos+hdr+int64(vl) > w.total {
				return formatErr(w.path, fmt.Sprintf("truncated: pixel data at byte %d declares %d bytes but %s at byte %d",
					w.base+pos+hdr, vl, w.where(), w.base+w.total), io.ErrUnexpectedEOF)
			}
			return nil
		}
		start := pos
		if pos, err = w.value(t, vr, vl, pos+hdr, -1, 0); err != nil {
			return err
		}
		if vr == "UN" && vl == undefinedLength {
			w.drop = append(w.drop, [2]int64{start, pos})
		}
	}
}

// cut returns b[:end] without the dropped ranges.
func (w *walker) cut(b []byte, end int64) []byte {
	if len(w.drop) == 0 {
		return b[:end:end]
	}
	out := make([]byte, 0, end)
	at := int64(0)
	for _, d := range w.drop {
		if d[0] >= end {
			break
		}
		out = append(out, b[at:d[0]]...)
		at = d[1]
	}
	if at < end {
		out = append(out, b[at:end]...)
	}
	return out
}

// value walks the value of an element that starts at pos; end is the end
// of the enclosing item (-1: the stream).
func (w *walker) value(t tag.Tag, vr string, vl uint32, pos, end int64, depth int) (int64, error) {
	if vl == undefinedLength {
		switch vr {
		case "SQ":
			return w.sequence(pos, -1, depth+1)
		case "UN":
			// PS3.5 §6.2.2: a UN value of undefined length is a sequence
			// encoded in Implicit VR Little Endian, whatever the syntax.
			implicit, bo := w.implicit, w.bo
			w.implicit, w.bo = true, binary.LittleEndian
			end, err := w.sequence(pos, -1, depth+1)
			w.implicit, w.bo = implicit, bo
			return end, err
		case "OB", "OW":
			return w.fragments(pos)
		}
		return 0, formatErr(w.path, fmt.Sprintf("element %s (VR %s) at byte %d has undefined length", tagString(t), vr, w.base+pos), nil)
	}
	n := int64(vl)
	if end >= 0 && pos+n > end {
		return 0, formatErr(w.path, fmt.Sprintf("element %s at byte %d declares %d bytes but its item ends at byte %d", tagString(t), w.base+pos, n, w.base+end), nil)
	}
	if pos+n > int64(len(w.b)) { // the message is built only when needed
		if err := w.need(pos, n, "element "+tagString(t)); err != nil {
			return 0, err
		}
	}
	if vr == "SQ" {
		return w.sequence(pos, pos+n, depth+1)
	}
	return pos + n, nil
}

// sequence walks the items of a sequence from pos to end (-1: until the
// sequence delimiter).
func (w *walker) sequence(pos, end int64, depth int) (int64, error) {
	if depth > maxDepth {
		return 0, formatErr(w.path, fmt.Sprintf("sequences nested deeper than %d at byte %d", maxDepth, w.base+pos), nil)
	}
	for {
		if end >= 0 && pos == end {
			return pos, nil
		}
		t, _, vl, _, err := w.header(pos)
		if err != nil {
			return 0, err
		}
		switch {
		case t.Group == 0xFFFE && t.Element == 0xE0DD && end < 0:
			return pos + 8, nil
		case t.Group == 0xFFFE && t.Element == 0xE000:
			pos += 8
			if vl == undefinedLength {
				if pos, err = w.items(pos, -1, depth); err != nil {
					return 0, err
				}
				continue
			}
			n := int64(vl)
			if end >= 0 && pos+n > end {
				return 0, formatErr(w.path, fmt.Sprintf("item at byte %d declares %d bytes but its sequence ends at byte %d", w.base+pos, n, w.base+end), nil)
			}
			if err := w.need(pos, n, "item"); err != nil {
				return 0, err
			}
			if pos, err = w.items(pos, pos+n, depth); err != nil {
				return 0, err
			}
		default:
			return 0, formatErr(w.path, fmt.Sprintf("element %s at byte %d inside a sequence is not an item", tagString(t), w.base+pos), nil)
		}
	}
}

// items walks the elements of one item from pos to end (-1: until the
// item delimiter).
func (w *walker) items(pos, end int64, depth int) (int64, error) {
	for {
		if end >= 0 && pos == end {
			return pos, nil
		}
		t, vr, vl, hdr, err := w.header(pos)
		if err != nil {
			return 0, err
		}
		if t.Group == 0xFFFE {
			if t.Element == 0xE00D && end < 0 {
				return pos + 8, nil
			}
			return 0, formatErr(w.path, fmt.Sprintf("misplaced item tag %s at byte %d", tagString(t), w.base+pos), nil)
		}
		if pos, err = w.value(t, vr, vl, pos+hdr, end, depth); err != nil {
			return 0, err
		}
	}
}

// fragments walks an undefined-length OB/OW value made of items of
// defined length ended by a sequence delimiter (PS3.5 §A.4).
func (w *walker) fragments(pos int64) (int64, error) {
	for {
		t, _, vl, _, err := w.header(pos)
		if err != nil {
			return 0, err
		}
		switch {
		case t.Group == 0xFFFE && t.Element == 0xE0DD:
			return pos + 8, nil
		case t.Group == 0xFFFE && t.Element == 0xE000 && vl != undefinedLength:
			if err := w.need(pos+8, int64(vl), "fragment"); err != nil {
				return 0, err
			}
			pos += 8 + int64(vl)
		default:
			return 0, formatErr(w.path, fmt.Sprintf("bad fragment %s at byte %d", tagString(t), w.base+pos), nil)
		}
	}
}

// metaFor returns a minimal file meta information block that tells the
// library how the data set bytes handed to it are encoded (always
// uninflated), so that it needs no guessing.
func metaFor(s syntax) []byte {
	ts := tsExplicitLE
	switch {
	case s.implicit:
		ts = tsImplicitLE
	case s.bo == binary.BigEndian:
		ts = tsExplicitBE
	}
	val := []byte(ts)
	if len(val)%2 == 1 {
		val = append(val, 0)
	}
	var b bytes.Buffer
	b.Write(make([]byte, 128))
	b.WriteString("DICM")
	group := 8 + len(val)
	b.Write([]byte{0x02, 0x00, 0x00, 0x00, 'U', 'L', 4, 0})
	binary.Write(&b, binary.LittleEndian, uint32(group))
	b.Write([]byte{0x02, 0x00, 0x10, 0x00, 'U', 'I'})
	binary.Write(&b, binary.LittleEndian, uint16(len(val)))
	b.Write(val)
	return b.Bytes()
}

var (
	metaImplicit = metaFor(syntax{implicit: true, bo: binary.LittleEndian})
	metaExplicit = metaFor(syntax{bo: binary.LittleEndian})
	metaBig      = metaFor(syntax{bo: binary.BigEndian})
)
