package dicom

import "encoding/binary"

// JPEG Lossless, Non-Hierarchical (process 14) decoder, ITU-T T.81
// (ISO/IEC 10918-1) Annex H, for one grey-scale component of 2 to 16 bits
// with any of the selection values 1–7 (Table H.1) and any point
// transform; the Huffman decoding follows Annex F.2.2 (DECODE, RECEIVE,
// EXTEND) and Annex C (table specification). DICOM transfer syntaxes
// 1.2.840.10008.1.2.4.57 and .70 (PS3.5 §A.4.1, §8.2.1).

// Marker codes (T.81 Table B.1).
const (
	mSOF3 = 0xC3
	mDHT  = 0xC4
	mSOI  = 0xD8
	mEOI  = 0xD9
	mSOS  = 0xDA
	mDRI  = 0xDD
	mRST0 = 0xD0
)

// huffTable is a lossless DC-class Huffman table in the form of T.81
// F.2.2.3: mincode, maxcode and valptr per code length.
type huffTable struct {
	defined bool
	maxcode [18]int32
	mincode [17]int32
	valptr  [17]int32
	vals    []byte
}

// build makes the decoding tables from BITS (counts of codes of each
// length 1–16) and HUFFVAL (T.81 C.2, Figures C.1–C.2 and F.15).
func (h *huffTable) build(bits []byte, vals []byte) error {
	code := int32(0)
	k := 0
	for l := 1; l <= 16; l++ {
		n := int(bits[l-1])
		if n == 0 {
			h.maxcode[l] = -1
		} else {
			h.valptr[l] = int32(k)
			h.mincode[l] = code
			code += int32(n)
			k += n
			h.maxcode[l] = code - 1
		}
		if code > 1<<l {
			return codecErr("JPEG Huffman table has more codes of length %d than fit", l)
		}
		code <<= 1
	}
	h.maxcode[17] = 0x7FFFFFFF
	h.vals = vals
	h.defined = true
	return nil
}

// bitReader reads entropy-coded bits, removing stuffed zero bytes after
// 0xFF (T.81 F.1.2.3) and stopping at a marker.
type bitReader struct {
	b      []byte
	pos    int
	acc    uint32
	n      int  // bits in acc
	marker bool // a marker was reached; further bits are zeros (and an error when used)
	over   int  // bits read past a marker or the end
}

func (r *bitReader) fill() {
	for r.n <= 24 {
		if r.marker || r.pos >= len(r.b) {
			r.acc <<= 8
			r.n += 8
			r.over += 8
			continue
		}
		c := r.b[r.pos]
		if c == 0xFF {
			if r.pos+1 < len(r.b) && r.b[r.pos+1] == 0x00 {
				r.pos += 2
			} else {
				r.marker = true
				continue
			}
		} else {
			r.pos++
		}
		r.acc = r.acc<<8 | uint32(c)
		r.n += 8
	}
}

func (r *bitReader) bit() int32 {
	if r.n == 0 {
		r.fill()
	}
	r.n--
	return int32(r.acc>>uint(r.n)) & 1
}

func (r *bitReader) bits(k int) int32 {
	if k == 0 {
		return 0
	}
	if r.n < k {
		r.fill()
	}
	r.n -= k
	return int32(r.acc>>uint(r.n)) & (1<<uint(k) - 1)
}

// exhausted reports whether bits beyond the entropy-coded data were used.
func (r *bitReader) exhausted() bool { return r.over > 0 && r.n < r.over }

// decode is T.81 F.2.2.3 DECODE.
func (r *bitReader) decode(h *huffTable) (int, error) {
	code := r.bit()
	l := 1
	for ; l <= 16 && code > h.maxcode[l]; l++ {
		code = code<<1 | r.bit()
	}
	if l > 16 {
		return 0, codecErr("JPEG Huffman code not in the table")
	}
	j := h.valptr[l] + code - h.mincode[l]
	if int(j) >= len(h.vals) || j < 0 {
		return 0, codecErr("JPEG Huffman code not in the table")
	}
	return int(h.vals[j]), nil
}

// restart skips to the RSTn marker expected after a restart interval
// (T.81 F.1.2.3 / H.1.2.1) and resets the reader.
func (r *bitReader) restart(want int) error {
	r.acc, r.n, r.over = 0, 0, 0
	r.marker = false
	if r.pos+1 >= len(r.b) || r.b[r.pos] != 0xFF || r.b[r.pos+1] != byte(mRST0+want%8) {
		return codecErr("JPEG restart marker RST%d missing at byte %d", want%8, r.pos)
	}
	r.pos += 2
	return nil
}

// ljpegFrame is what the decoder found in the frame and scan headers.
type ljpegFrame struct {
	precision, rows, cols int
	predictor, pt         int
	restart               int
}

// decodeLosslessJPEG decodes one frame of JPEG process 14 into dst as
// little-endian 16-bit samples (precision > 8) or bytes (precision <= 8
// with bytesPer 1). rows and cols are the DICOM matrix, which the frame
// header must match.
func decodeLosslessJPEG(dst []byte, src []byte, rows, cols, bytesPer int) error {
	var tables [4]huffTable
	var fr ljpegFrame
	haveSOF := false
	p := 0
	if len(src) < 4 || src[0] != 0xFF || src[1] != mSOI {
		return codecErr("JPEG stream does not start with SOI")
	}
	p = 2
	for {
		// Find the next marker (fill bytes 0xFF may precede it, B.1.1.2).
		if p+1 >= len(src) {
			return codecErr("JPEG stream ends before the scan")
		}
		if src[p] != 0xFF {
			return codecErr("JPEG marker expected at byte %d, found 0x%02X", p, src[p])
		}
		for p < len(src) && src[p] == 0xFF {
			p++
		}
		if p >= len(src) {
			return codecErr("JPEG stream ends in a marker")
		}
		m := int(src[p])
		p++
		if m == mEOI {
			return codecErr("JPEG stream ends (EOI) before a scan")
		}
		if p+2 > len(src) {
			return codecErr("JPEG marker segment 0x%02X truncated", m)
		}
		ln := int(binary.BigEndian.Uint16(src[p:]))
		if ln < 2 || p+ln > len(src) {
			return codecErr("JPEG marker segment 0x%02X declares %d bytes; %d remain", m, ln, len(src)-p)
		}
		seg := src[p+2 : p+ln]
		p += ln
		switch {
		case m == mSOF3:
			// B.2.2: P, Y, X, Nf, then Nf × (C, H/V, Tq).
			if len(seg) < 6 {
				return codecErr("JPEG frame header too short")
			}
			fr.precision = int(seg[0])
			fr.rows = int(binary.BigEndian.Uint16(seg[1:]))
			fr.cols = int(binary.BigEndian.Uint16(seg[3:]))
			if nf := int(seg[5]); nf != 1 || len(seg) < 9 {
				return codecErr("JPEG lossless frame with %d components; tauvox reads grey-scale (1 component)", nf)
			}
			if fr.precision < 2 || fr.precision > 16 {
				return codecErr("JPEG lossless precision %d bits (T.81 allows 2–16)", fr.precision)
			}
			if fr.rows != rows || fr.cols != cols {
				return codecErr("JPEG frame is %d×%d (X×Y); the DICOM header says %d×%d", fr.cols, fr.rows, cols, rows)
			}
			if fr.precision > 8*bytesPer {
				return codecErr("JPEG precision %d bits exceeds BitsAllocated %d", fr.precision, 8*bytesPer)
			}
			haveSOF = true
		case m >= 0xC0 && m <= 0xCF && m != mDHT && m != 0xC8 && m != 0xCC:
			return codecErr("JPEG frame type SOF%d is not lossless process 14 (SOF3)", m-0xC0)
		case m == mDHT:
			// B.2.4.2: one or more tables (Tc/Th, BITS[16], HUFFVAL).
			for q := 0; q < len(seg); {
				if q+17 > len(seg) {
					return codecErr("JPEG Huffman table truncated")
				}
				tc, th := seg[q]>>4, seg[q]&15
				bits := seg[q+1 : q+17]
				total := 0
				for _, b := range bits {
					total += int(b)
				}
				if th > 3 || tc > 1 || q+17+total > len(seg) || total > 256 {
					return codecErr("JPEG Huffman table %d/%d is malformed", tc, th)
				}
				if tc == 0 {
					if err := tables[th].build(bits, seg[q+17:q+17+total]); err != nil {
						return err
					}
				}
				q += 17 + total
			}
		case m == mDRI:
			if len(seg) < 2 {
				return codecErr("JPEG restart interval segment too short")
			}
			fr.restart = int(binary.BigEndian.Uint16(seg))
		case m == mSOS:
			// B.2.3: Ns, Ns × (Cs, Td/Ta), Ss, Se, Ah/Al; Ss is the
			// predictor and Al the point transform in lossless mode.
			if !haveSOF {
				return codecErr("JPEG scan before a lossless frame header (SOF3)")
			}
			if len(seg) < 6 {
				return codecErr("JPEG scan header of %d bytes is too short", len(seg))
			}
			if seg[0] != 1 {
				return codecErr("JPEG scan with %d components; tauvox reads grey-scale", seg[0])
			}
			td := seg[2] >> 4
			fr.predictor = int(seg[3])
			fr.pt = int(seg[5] & 15)
			if fr.predictor < 1 || fr.predictor > 7 {
				return codecErr("JPEG lossless selection value %d (T.81 Table H.1 allows 1–7)", fr.predictor)
			}
			if fr.pt >= fr.precision {
				return codecErr("JPEG point transform %d with precision %d", fr.pt, fr.precision)
			}
			if td > 3 || !tables[td].defined {
				return codecErr("JPEG scan uses Huffman table %d, which is not defined", td)
			}
			return ljpegScan(dst, src[p:], &fr, &tables[td], bytesPer)
		}
	}
}

// ljpegScan decodes the entropy-coded samples (T.81 H.1.2, H.2). A
// restart interval must be a whole number of lines (every DICOM encoder
// known writes one line or none; other intervals are refused).
func ljpegScan(dst []byte, data []byte, fr *ljpegFrame, h *huffTable, bytesPer int) error {
	r := bitReader{b: data}
	cols, rows := fr.cols, fr.rows
	if fr.restart%cols != 0 {
		return codecErr("JPEG restart interval of %d samples is not a whole number of %d-sample lines", fr.restart, cols)
	}
	// prev holds the reconstructed samples of the previous line and cur
	// those of this line (before the point transform).
	prev := make([]int32, cols)
	cur := make([]int32, cols)
	initial := int32(1) << uint(fr.precision-fr.pt-1)
	mask := int32(1)<<16 - 1
	lines, rst := 0, 0
	for y := 0; y < rows; y++ {
		// The first line of the image and of each restart interval is
		// predicted from Ra, its first sample from 2^(P−Pt−1); every other
		// line starts from Rb (H.1.2.1).
		first := y == 0
		if fr.restart > 0 && y > 0 && lines == fr.restart/cols {
			if err := r.restart(rst); err != nil {
				return err
			}
			rst++
			lines = 0
			first = true
		}
		lines++
		for x := 0; x < cols; x++ {
			var px int32
			switch {
			case x == 0 && first:
				px = initial
			case x == 0:
				px = prev[0]
			case first:
				px = cur[x-1]
			default:
				ra, rb, rc := cur[x-1], prev[x], prev[x-1]
				switch fr.predictor { // Table H.1
				case 1:
					px = ra
				case 2:
					px = rb
				case 3:
					px = rc
				case 4:
					px = ra + rb - rc
				case 5:
					px = ra + (rb-rc)>>1
				case 6:
					px = rb + (ra-rc)>>1
				case 7:
					px = (ra + rb) >> 1
				}
			}
			t, err := r.decode(h)
			if err != nil {
				return err
			}
			var diff int32
			switch {
			case t == 16:
				diff = 32768 // H.1.2.2: SSSS 16 carries no extra bits
			case t > 16:
				return codecErr("JPEG difference category %d (at most 16)", t)
			case t > 0:
				v := r.bits(t)
				if v < 1<<uint(t-1) { // EXTEND, F.2.2.1
					v += -1<<uint(t) + 1
				}
				diff = v
			}
			if r.exhausted() {
				return codecErr("JPEG entropy-coded data end at line %d of %d", y+1, rows)
			}
			cur[x] = (px + diff) & mask // modulo 2^16, H.2.2
		}
		// Samples out, shifted back by the point transform (H.1.2.3).
		row := dst[y*cols*bytesPer:]
		for x, v := range cur {
			v = (v << uint(fr.pt)) & mask
			if bytesPer == 1 {
				row[x] = byte(v)
			} else {
				binary.LittleEndian.PutUint16(row[2*x:], uint16(v))
			}
		}
		prev, cur = cur, prev
	}
	return nil
}
