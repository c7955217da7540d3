package gzsplit

import (
	"encoding/binary"
	"errors"

	"github.com/tauvox/tauvox/internal/halves"
)

// marker is the value of the window placeholder for window byte 0; the
// placeholder for window byte i (0 ≤ i < 32768, counted from the start of
// the 32 KiB before the tail) is marker+i. Literal bytes are below 256.
const marker = 256

// Tail is the decoded end of a deflate stream: the output from a block
// boundary in the middle of the compressed data to the stream's end.
type Tail struct {
	// Start is the bit offset of the first block, from the start of the
	// data given to Decode.
	Start int64
	// End is the byte offset just after the deflate stream (where a gzip
	// trailer begins).
	End int
	// head is the output up to the first point after which no marker can
	// occur (32 KiB free of markers), with placeholders; rest follows it.
	head []uint16
	rest []byte
}

// Len returns the number of bytes the tail decodes to.
func (t *Tail) Len() int { return len(t.head) + len(t.rest) }

// Resolve returns the tail's bytes as two parts, head and rest, in
// order: head (a fresh slice) is the first part with each placeholder
// filled from window, the 32 KiB of output that precede the tail in the
// stream; rest is the remainder, which holds no placeholder (shared with
// t, not copied).
func (t *Tail) Resolve(window []byte) (head, rest []byte, err error) {
	if len(window) != windowSize {
		return nil, nil, errors.New("gzsplit: window must be 32 KiB")
	}
	head = make([]byte, len(t.head))
	// The caller waits for this (the ordinary decoder is done): a large
	// head is filled in two halves at once.
	h := len(t.head) / 2
	if h < 1<<19 {
		resolve(head, t.head, window)
		return head, t.rest, nil
	}
	halves.Both(func() { resolve(head[:h], t.head[:h], window) }, func() { resolve(head[h:], t.head[h:], window) })
	return head, t.rest, nil
}

// resolve writes src into dst with each placeholder replaced by its byte
// of window.
func resolve(dst []byte, src []uint16, window []byte) {
	for i, v := range src {
		if v < marker {
			dst[i] = byte(v)
		} else {
			dst[i] = window[v-marker]
		}
	}
}

// Decode decodes data from bit offset start, a block boundary, to the end
// of the deflate stream (the block with BFINAL set), with the 32 KiB of
// output before start unknown. sizeHint, when positive, is the expected
// output size (to allocate once). It fails when start is not a block
// boundary (or the data are corrupt).
func Decode(data []byte, start int64, sizeHint int) (*Tail, error) {
	if start < 0 || start/8 >= int64(len(data)) {
		return nil, errCorrupt
	}
	b := &bits{data: data, pos: int(start / 8)}
	b.refill()
	b.take(uint(start % 8))
	t := &Tail{Start: start}
	var lit, dist huffman
	// First stage: 16-bit output behind a virtual window of placeholders.
	// It lasts until 32 KiB of output free of placeholders: on float
	// samples compressed at gzip level 1 that took 3 M bytes of a 37 MB
	// end, so the room is made for up to 8 Mi at once (only the part used
	// is ever touched) rather than grown (and copied) from a smaller one.
	head := make([]uint16, windowSize, windowSize+min(max(sizeHint/4, 1<<16), 1<<23))
	for i := range windowSize {
		head[i] = uint16(marker + i)
	}
	final := false
	var err error
	for !final {
		if head, final, err = block(b, head, &lit, &dist); err != nil {
			return nil, err
		}
		if len(head)-windowSize >= windowSize && clean(head[len(head)-windowSize:]) {
			break
		}
	}
	t.head = head[windowSize:]
	if !final {
		// Second stage: bytes, behind the last 32 KiB of the first (free of
		// placeholders).
		rest := make([]byte, windowSize, windowSize+max(sizeHint-len(t.head), 1<<16)+maxMatch+8)
		for i, v := range head[len(head)-windowSize:] {
			rest[i] = byte(v)
		}
		for !final {
			if rest, final, err = block(b, rest, &lit, &dist); err != nil {
				return nil, err
			}
		}
		t.rest = rest[windowSize:]
	}
	// The stream ends at the next byte boundary.
	b.take(b.n & 7)
	t.End = b.pos - int(b.n/8)
	return t, nil
}

func clean(s []uint16) bool {
	for _, v := range s {
		if v >= marker {
			return false
		}
	}
	return true
}

// Find returns the bit offset of the first position at or after byte
// offset from (and before limit) where a dynamic-Huffman block header
// (BTYPE 2, not final) is valid: code counts in range, a complete
// code-length code, complete literal/length and distance codes with an
// end-of-block code. Such a header is rare in other data, so a position
// found is very likely a block boundary; Decode confirms it.
func Find(data []byte, from, limit int) (int64, bool) {
	limit = min(limit, len(data)-8)
	for p := from; p < limit; p++ {
		w := binary.LittleEndian.Uint32(data[p:])
		for k := uint(0); k < 8; k++ {
			// BFINAL 0, BTYPE 10 (bits 1-2 = 0b10, LSB first: bit1=0, bit2=1).
			if (w>>k)&7 != 4 {
				continue
			}
			hlit := (w >> (k + 3)) & 31
			hdist := (w >> (k + 8)) & 31
			if hlit > 29 || hdist > 29 {
				continue
			}
			start := int64(p)*8 + int64(k)
			if plausible(data, start) {
				return start, true
			}
		}
	}
	return 0, false
}

// plausible checks the code definitions of a dynamic block header at bit
// offset start. The code-length code comes first and must be complete
// (its Kraft sum exactly 1): most positions that pass Find's first test
// fail this one, which costs a few shifts, before any table is built.
func plausible(data []byte, start int64) bool {
	b := &bits{data: data, pos: int(start / 8)}
	b.refill()
	b.take(uint(start % 8))
	b.take(3)
	if c := *b; !clComplete(&c) {
		return false
	}
	var lit, dist huffman
	return b.dynamicHeader(&lit, &dist) == nil
}

// clComplete reports whether the code-length code of a dynamic block
// header read by b (after BFINAL and BTYPE) is a complete prefix code:
// HCLEN+4 lengths of 3 bits after HLIT, HDIST and HCLEN (RFC 1951
// §3.2.7), whose Kraft sum Σ 2^(7−l) over the nonzero lengths l must be
// 2^7. Data too short to tell are left to dynamicHeader.
func clComplete(b *bits) bool {
	if !b.need(14) {
		return true
	}
	nclen := int(b.take(14)>>10) + 4
	sum := 0
	for range nclen {
		if !b.need(3) {
			return true
		}
		if l := b.take(3); l != 0 {
			sum += 1 << (7 - l)
		}
	}
	return sum == 1<<7
}

// HeadLen returns the length of the part of the tail that may hold
// placeholders (the head Resolve fills).
func (t *Tail) HeadLen() int { return len(t.head) }

// Rest returns the part of the tail after the head, free of placeholders
// (shared with t).
func (t *Tail) Rest() []byte { return t.rest }

// CombineCRC returns the CRC-32 (IEEE) of A followed by B from crcA, crcB
// and the length of B: the method of zlib's crc32_combine (Adler and
// Gailly), multiplying by the matrix of a zero byte in GF(2) raised to
// the power lenB by repeated squaring.
func CombineCRC(crcA, crcB uint32, lenB int64) uint32 {
	if lenB <= 0 {
		return crcA
	}
	var even, odd [32]uint32
	odd[0] = 0xedb88320 // the reversed CRC-32 polynomial: one zero bit
	row := uint32(1)
	for n := 1; n < 32; n++ {
		odd[n] = row
		row <<= 1
	}
	gf2Square(&even, &odd) // two zero bits
	gf2Square(&odd, &even) // four zero bits
	for {
		gf2Square(&even, &odd) // one zero byte, then doubled each round
		if lenB&1 != 0 {
			crcA = gf2Times(&even, crcA)
		}
		lenB >>= 1
		if lenB == 0 {
			break
		}
		gf2Square(&odd, &even)
		if lenB&1 != 0 {
			crcA = gf2Times(&odd, crcA)
		}
		lenB >>= 1
		if lenB == 0 {
			break
		}
	}
	return crcA ^ crcB
}

func gf2Times(mat *[32]uint32, vec uint32) uint32 {
	var sum uint32
	for i := 0; vec != 0; i, vec = i+1, vec>>1 {
		if vec&1 != 0 {
			sum ^= mat[i]
		}
	}
	return sum
}

func gf2Square(square, mat *[32]uint32) {
	for n := range 32 {
		square[n] = gf2Times(mat, mat[n])
	}
}
