// Package gzsplit decodes the end of a gzip member in parallel with its
// beginning. Deflate (RFC 1951) is sequential by design: each block may
// copy from the 32 KiB of output before it. gzsplit finds a block that
// starts somewhere in the middle of the compressed data by its header
// (Tail), decodes from there on with the 32 KiB before it unknown,
// writing a placeholder (a marker naming the window position) wherever
// the data copy from that unknown window, and fills the markers in once
// the beginning of the member has been decoded by an ordinary decoder
// (Resolve). The caller checks the whole output against the member's
// CRC-32 (RFC 1952), so a wrong guess is detected and costs only time.
//
// Head is the ordinary, in-order decoder of the same blocks for the
// beginning (it can be told to stop at the end's first block), so that
// both halves cost the same per compressed byte.
//
// The method is that of the two-stage parallel decompressors described by
// Kerbiriou & Chikhi (2019, "Parallel decompression of gzip-compressed
// files and random access to DNA sequences", IEEE IPDPSW) and Knespel &
// Brunst (2023, "Rapidgzip", HPDC); the code is our own.
package gzsplit

import (
	"encoding/binary"
	"errors"
	mbits "math/bits"
	"slices"
	"unsafe"
)

// errCorrupt reports data that is not a valid deflate stream from the
// chosen start.
var errCorrupt = errors.New("gzsplit: invalid deflate data")

const (
	windowSize = 1 << 15 // deflate's largest distance
	primary    = 10      // bits of the first-level Huffman table
	maxBits    = 15
	// A table entry (uint32) holds the code length in bits 0–3 (0 marks
	// a code longer than the primary table, decoded by the slow path),
	// the number of extra bits that follow the code in bits 4–7, flags
	// in bits 8–15 and a value in bits 16–31: the symbol of a plain code;
	// for the literal/length code the literal byte or the length's base;
	// for the distance code the distance's base (RFC 1951 §3.2.5). The
	// decoder then needs no second lookup of what a symbol means.
	isLiteral = 1 << 8
	isEnd     = 1 << 9  // end of block
	isInvalid = 1 << 10 // a symbol no valid stream uses (286, 287; distances 30, 31)
)

// huffman is a canonical Huffman code (RFC 1951 §3.2.2) with a lookup
// table for codes up to primary bits and counts for the rest.
type huffman struct {
	table  [1 << primary]uint32
	count  [maxBits + 1]uint16
	symbol [288]uint16 // symbols ordered by code
	// The state of the canonical decoding in decodeLong after primary
	// bits that match no shorter code: the first code and the symbol
	// index of length primary+1.
	firstLong, indexLong int
}

// Completeness rules of build.
const (
	complete = iota // the code must be complete
	single          // or a single code of one bit (zlib's rule for lengths and distances)
	any             // or anything not over-subscribed (the fixed distance code)
)

// build makes the code of the given lengths (0 = unused symbol), with
// table entries from info (litInfo, distInfo; nil: a plain code whose
// entries hold the symbol). It refuses over-subscribed codes and
// incomplete ones beyond what rule allows.
func (h *huffman) build(lengths []uint8, rule int, info []uint32) error {
	h.count = [maxBits + 1]uint16{}
	for _, l := range lengths {
		h.count[l]++
	}
	h.count[0] = 0
	left := 1
	for l := 1; l <= maxBits; l++ {
		left <<= 1
		left -= int(h.count[l])
		if left < 0 {
			return errCorrupt // over-subscribed
		}
	}
	if left > 0 && rule != any && !(rule == single && h.count[1] == 1 && left == 1<<maxBits-1<<(maxBits-1)) {
		return errCorrupt
	}
	var offs [maxBits + 2]uint16
	for l := 1; l <= maxBits; l++ {
		offs[l+1] = offs[l] + h.count[l]
	}
	for s, l := range lengths {
		if l != 0 {
			h.symbol[offs[l]] = uint16(s)
			offs[l]++
		}
	}
	// decodeLong's state after primary bits (as its loop computes it).
	first, index := 0, 0
	for l := 1; l <= primary; l++ {
		index += int(h.count[l])
		first = (first + int(h.count[l])) << 1
	}
	h.firstLong, h.indexLong = first, index
	// Fill the table: walk the codes in canonical order.
	h.table = [1 << primary]uint32{}
	// (Codes longer than the table are left to decodeLong.)
	code, idx := 0, 0
	for l := 1; l <= primary; l++ {
		for k := 0; k < int(h.count[l]); k++ {
			rev := reverse(code, l)
			sym := h.symbol[idx]
			e := uint32(sym)<<16 | uint32(l)
			if info != nil {
				e = info[sym] | uint32(l)
			}
			for j := rev; j < 1<<primary; j += 1 << l {
				h.table[j] = e
			}
			code++
			idx++
		}
		code <<= 1
	}
	return nil
}

func reverse(code, n int) int {
	r := 0
	for i := 0; i < n; i++ {
		r = r<<1 | code&1
		code >>= 1
	}
	return r
}

// bits reads deflate's LSB-first bit stream from memory.
type bits struct {
	data []byte
	pos  int    // next byte to load
	buf  uint64 // loaded bits, next bit lowest
	n    uint   // bits in buf
}

func (b *bits) refill() {
	if b.pos+8 <= len(b.data) {
		b.buf |= binary.LittleEndian.Uint64(b.data[b.pos:]) << b.n
		adv := (63 - b.n) >> 3
		b.pos += int(adv)
		b.n |= 56
		return
	}
	for b.n <= 56 && b.pos < len(b.data) {
		b.buf |= uint64(b.data[b.pos]) << b.n
		b.pos++
		b.n += 8
	}
}

// need makes sure k ≤ 56 bits are loaded, or reports the end of data.
func (b *bits) need(k uint) bool {
	if b.n < k {
		b.refill()
	}
	return b.n >= k
}

func (b *bits) take(k uint) uint64 {
	v := b.buf & (1<<k - 1)
	b.buf >>= k
	b.n -= k
	return v
}

// bitPos returns the position of the next unread bit from the start of
// data.
func (b *bits) bitPos() int64 { return int64(b.pos)*8 - int64(b.n) }

// decode reads one symbol of h, or returns −1 for data that are not a
// code of h. Needs at least 15 bits loaded (or the end). The table lookup
// is small enough to be inlined into the loops; longer codes go to
// decodeLong.
func (b *bits) decode(h *huffman) int {
	e := h.table[b.buf&(1<<primary-1)]
	l := uint(e & 15)
	if l == 0 || l > b.n {
		return b.decodeLong(h)
	}
	b.buf >>= l
	b.n -= l
	return int(e >> 16)
}

// decodeLong is the slow path of decode: codes longer than primary bits,
// an unused pattern, or too few bits left.
func (b *bits) decodeLong(h *huffman) int {
	if e := h.table[b.buf&(1<<primary-1)]; e&15 != 0 {
		return -1 // a short code, but fewer bits than it needs
	}
	// Canonical decoding one bit at a time (as in zlib's puff.c), from
	// length primary+1 when that many bits are loaded: the first primary
	// bits (the code's most significant, read first) match no shorter
	// code, as their table entry says.
	code, first, index, l := 0, 0, 0, 1
	if b.n >= primary {
		code = int(mbits.Reverse16(uint16(b.buf&(1<<primary-1)))>>(16-primary)) << 1
		b.buf >>= primary
		b.n -= primary
		first, index, l = h.firstLong, h.indexLong, primary+1
	}
	for ; l <= maxBits; l++ {
		if b.n == 0 {
			return -1
		}
		code |= int(b.buf & 1)
		b.buf >>= 1
		b.n--
		count := int(h.count[l])
		if code-count < first {
			return int(h.symbol[index+(code-first)])
		}
		index += count
		first += count
		first <<= 1
		code <<= 1
	}
	return -1
}

var (
	lengthBase  = [29]uint16{3, 4, 5, 6, 7, 8, 9, 10, 11, 13, 15, 17, 19, 23, 27, 31, 35, 43, 51, 59, 67, 83, 99, 115, 131, 163, 195, 227, 258}
	lengthExtra = [29]uint8{0, 0, 0, 0, 0, 0, 0, 0, 1, 1, 1, 1, 2, 2, 2, 2, 3, 3, 3, 3, 4, 4, 4, 4, 5, 5, 5, 5, 0}
	distBase    = [30]uint16{1, 2, 3, 4, 5, 7, 9, 13, 17, 25, 33, 49, 65, 97, 129, 193, 257, 385, 513, 769, 1025, 1537, 2049, 3073, 4097, 6145, 8193, 12289, 16385, 24577}
	distExtra   = [30]uint8{0, 0, 0, 0, 1, 1, 2, 2, 3, 3, 4, 4, 5, 5, 6, 6, 7, 7, 8, 8, 9, 9, 10, 10, 11, 11, 12, 12, 13, 13}
	// clOrder is the order of the code-length code lengths (RFC 1951 §3.2.7).
	clOrder = [19]uint8{16, 17, 18, 0, 8, 7, 9, 6, 10, 5, 11, 4, 12, 3, 13, 2, 14, 1, 15}
	// litInfo and distInfo are the table entries (without the code
	// length) of each literal/length and distance symbol.
	litInfo  [288]uint32
	distInfo [32]uint32
)

var fixedLit, fixedDist huffman

func init() {
	for s := range litInfo {
		switch {
		case s < 256:
			litInfo[s] = uint32(s)<<16 | isLiteral
		case s == 256:
			litInfo[s] = isEnd
		case s < 257+29:
			litInfo[s] = uint32(lengthBase[s-257])<<16 | uint32(lengthExtra[s-257])<<4
		default:
			litInfo[s] = isInvalid
		}
	}
	for s := range distInfo {
		if s < 30 {
			distInfo[s] = uint32(distBase[s])<<16 | uint32(distExtra[s])<<4
		} else {
			distInfo[s] = isInvalid
		}
	}
	var l [288]uint8
	for i := range l {
		switch {
		case i < 144:
			l[i] = 8
		case i < 256:
			l[i] = 9
		case i < 280:
			l[i] = 7
		default:
			l[i] = 8
		}
	}
	if err := fixedLit.build(l[:], complete, litInfo[:]); err != nil {
		panic(err)
	}
	var d [30]uint8
	for i := range d {
		d[i] = 5
	}
	if err := fixedDist.build(d[:], any, distInfo[:]); err != nil {
		panic(err)
	}
}

// dynamicHeader reads the code definitions of a dynamic block (after its
// 3 header bits) into lit and dist.
func (b *bits) dynamicHeader(lit, dist *huffman) error {
	if !b.need(14) {
		return errCorrupt
	}
	nlit := int(b.take(5)) + 257
	ndist := int(b.take(5)) + 1
	nclen := int(b.take(4)) + 4
	if nlit > 286 || ndist > 30 {
		return errCorrupt
	}
	var cl [19]uint8
	for i := 0; i < nclen; i++ {
		if !b.need(3) {
			return errCorrupt
		}
		cl[clOrder[i]] = uint8(b.take(3))
	}
	var clh huffman
	if err := clh.build(cl[:], complete, nil); err != nil {
		return err
	}
	var lengths [286 + 30]uint8
	for i := 0; i < nlit+ndist; {
		b.need(maxBits + 7)
		sym := b.decode(&clh)
		if sym < 0 {
			return errCorrupt
		}
		var rep int
		var val uint8
		switch {
		case sym < 16:
			lengths[i] = uint8(sym)
			i++
			continue
		case sym == 16:
			if i == 0 || !b.need(2) {
				return errCorrupt
			}
			val, rep = lengths[i-1], 3+int(b.take(2))
		case sym == 17:
			if !b.need(3) {
				return errCorrupt
			}
			rep = 3 + int(b.take(3))
		default:
			if !b.need(7) {
				return errCorrupt
			}
			rep = 11 + int(b.take(7))
		}
		if i+rep > nlit+ndist {
			return errCorrupt
		}
		for ; rep > 0; rep-- {
			lengths[i] = val
			i++
		}
	}
	if lengths[256] == 0 { // no end-of-block code
		return errCorrupt
	}
	if err := lit.build(lengths[:nlit], single, litInfo[:]); err != nil {
		return err
	}
	return dist.build(lengths[nlit:nlit+ndist], single, distInfo[:])
}

// symbols decodes the compressed data of one block into out (whose
// earlier part is the window), returning out extended.
func symbols[T uint8 | uint16](b *bits, out []T, lit, dist *huffman) ([]T, error) {
	// The bit reader's state lives in locals for the loop (the compiler
	// keeps them in registers; through b every step would be a load and
	// a store), and goes back to b around the slow paths and on return (save).
	buf, nb, pos, data := b.buf, b.n, b.pos, b.data
	for {
		// Room for the longest match and the 8 bytes a word copy may
		// write past it.
		if cap(out)-len(out) < maxMatch+8 {
			out = slices.Grow(out, maxMatch+8)
		}
		if nb < 48 {
			if pos+8 <= len(data) {
				buf |= load64(data, pos) << nb
				pos += int((63 - nb) >> 3)
				nb |= 56
			} else {
				b.buf, b.n, b.pos = buf, nb, pos
				b.refill()
				buf, nb, pos = b.buf, b.n, b.pos
			}
		}
		// decode, written out: the compiler does not inline it here.
		e := lit.table[buf&(1<<primary-1)]
		if l := uint(e & 15); l != 0 && l <= nb {
			buf >>= l
			nb -= l
		} else {
			b.buf, b.n, b.pos = buf, nb, pos
			sym := b.decodeLong(lit)
			buf, nb, pos = b.buf, b.n, b.pos
			if sym < 0 {
				return save(b, buf, nb, pos, out, errCorrupt)
			}
			e = litInfo[sym]
		}
		if e&isLiteral != 0 {
			// There is room (the top of the loop): store and lengthen
			// without append's check of the capacity.
			o := len(out)
			*(*T)(unsafe.Add(unsafe.Pointer(unsafe.SliceData(out)), uintptr(o)*unsafe.Sizeof(T(0)))) = T(e >> 16)
			out = unsafe.Slice(unsafe.SliceData(out), cap(out))[:o+1]
			continue
		}
		if e&(isEnd|isInvalid) != 0 {
			if e&isEnd != 0 {
				return save(b, buf, nb, pos, out, nil)
			}
			return save(b, buf, nb, pos, out, errCorrupt)
		}
		n := int(e >> 16)
		if x := uint(e >> 4 & 15); x > 0 {
			if nb < x {
				return save(b, buf, nb, pos, out, errCorrupt)
			}
			n += int(buf & (1<<x - 1))
			buf >>= x
			nb -= x
		}
		e = dist.table[buf&(1<<primary-1)]
		if l := uint(e & 15); l != 0 && l <= nb {
			buf >>= l
			nb -= l
		} else {
			b.buf, b.n, b.pos = buf, nb, pos
			ds := b.decodeLong(dist)
			buf, nb, pos = b.buf, b.n, b.pos
			if ds < 0 {
				return save(b, buf, nb, pos, out, errCorrupt)
			}
			e = distInfo[ds&31]
		}
		if e&isInvalid != 0 {
			return save(b, buf, nb, pos, out, errCorrupt)
		}
		d := int(e >> 16)
		if x := uint(e >> 4 & 15); x > 0 {
			if nb < x {
				return save(b, buf, nb, pos, out, errCorrupt)
			}
			d += int(buf & (1<<x - 1))
			buf >>= x
			nb -= x
		}
		o := len(out)
		from := o - d
		if from < 0 {
			return save(b, buf, nb, pos, out, errCorrupt)
		}
		// The copy, written out: out[from:from+n] appended, byte by
		// byte in effect (a match may overlap its own output). There is
		// room for n more elements and 8 bytes beyond (the top of the
		// loop), so a match from at least 8 bytes back is copied 8 bytes
		// at a time as unaligned words, which costs less than a call of
		// memmove for the short matches of float samples (3 or 4 bytes
		// from far back). The source of each word ends before the word
		// it is copied to begins, so every byte read has been written; a
		// word may reach past the match's end into the room after it,
		// which later output overwrites. Nearer matches go 4 bytes at a
		// time, or to copyNear.
		if sz := int(unsafe.Sizeof(T(0))); d >= 8/sz {
			base := unsafe.Pointer(unsafe.SliceData(out))
			dst, src := unsafe.Add(base, o*sz), unsafe.Add(base, from*sz)
			for k := 0; k < n*sz; k += 8 {
				*(*[8]byte)(unsafe.Add(dst, k)) = *(*[8]byte)(unsafe.Add(src, k))
			}
			out = out[:o+n]
		} else if sz == 1 && d >= 4 {
			// 4 bytes back (the period of float32 samples) to 7: the
			// same in words of 4 bytes.
			base := unsafe.Pointer(unsafe.SliceData(out))
			dst, src := unsafe.Add(base, o), unsafe.Add(base, from)
			for k := 0; k < n; k += 4 {
				*(*[4]byte)(unsafe.Add(dst, k)) = *(*[4]byte)(unsafe.Add(src, k))
			}
			out = out[:o+n]
		} else {
			out = copyNear(out, from, n)
		}
	}
}

// save stores the bit reader's state kept in symbols' locals, and
// returns symbols' results.
func save[T uint8 | uint16](b *bits, buf uint64, n uint, pos int, out []T, err error) ([]T, error) {
	b.buf, b.n, b.pos = buf, n, pos
	return out, err
}

// maxMatch is deflate's longest match.
const maxMatch = 258

// copyNear appends out[from:from+n] to out one element at a time.
func copyNear[T uint8 | uint16](out []T, from, n int) []T {
	for k := range n {
		out = append(out, out[from+k])
	}
	return out
}

// stored copies a stored block (after its 3 header bits).
func stored[T uint8 | uint16](b *bits, out []T) ([]T, error) {
	b.take(b.n & 7) // to the byte boundary
	if !b.need(32) {
		return out, errCorrupt
	}
	n := int(b.take(16))
	if int(b.take(16)) != ^n&0xffff {
		return out, errCorrupt
	}
	// Bytes still in the bit buffer come first, then the data.
	for ; n > 0 && b.n >= 8; n-- {
		out = append(out, T(b.take(8)))
	}
	if n == 0 {
		return out, nil
	}
	// The buffer is empty now; clear the look-ahead bits a refill left
	// above it, which belong to the bytes skipped below.
	b.buf = 0
	if b.pos+n > len(b.data) {
		return out, errCorrupt
	}
	for _, c := range b.data[b.pos : b.pos+n] {
		out = append(out, T(c))
	}
	b.pos += n
	return out, nil
}

// block decodes one block; final reports its BFINAL bit.
func block[T uint8 | uint16](b *bits, out []T, lit, dist *huffman) (_ []T, final bool, err error) {
	if !b.need(3) {
		return out, false, errCorrupt
	}
	final = b.take(1) == 1
	switch b.take(2) {
	case 0:
		out, err = stored(b, out)
	case 1:
		out, err = symbols(b, out, &fixedLit, &fixedDist)
	case 2:
		if err = b.dynamicHeader(lit, dist); err == nil {
			out, err = symbols(b, out, lit, dist)
		}
	default:
		err = errCorrupt
	}
	return out, final, err
}
