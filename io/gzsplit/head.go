package gzsplit

import (
	"errors"
	"io"
)

// Head decodes a deflate stream in order from its first block, where no
// earlier output can be referred to, for a caller that reads the output
// in pieces (io.Reader). It is the ordinary decoder beside a Tail: the
// same block decoder, so that the two halves of a split cost about the
// same per compressed byte. A Head is not safe for concurrent use.
type Head struct {
	b         bits
	lit, dist huffman
	out       []byte // the last 32 KiB read (the window), then output not yet read
	rd        int    // bytes of out already read
	final     bool   // the final block is decoded
	err       error
	stop      int64 // bit offset of a block where decoding pauses; −1: none
}

// ErrStop is returned by Read when the output before the stop set by
// SetStop has been read and the next block starts there.
var ErrStop = errors.New("gzsplit: at the stop")

// NewHead returns a Head that decodes data from byte offset start, the
// first block of a deflate stream.
func NewHead(data []byte, start int) *Head {
	h := &Head{b: bits{data: data, pos: start}, stop: -1}
	h.out = make([]byte, 0, 2<<20)
	return h
}

// Read reads decoded bytes into p. It returns io.EOF after the final
// block's output, and an error for corrupt data.
func (h *Head) Read(p []byte) (int, error) {
	for h.rd == len(h.out) {
		if h.err != nil {
			return 0, h.err
		}
		if h.final {
			return 0, io.EOF
		}
		if h.b.bitPos() == h.stop {
			return 0, ErrStop
		}
		// Keep the window; drop what was read before it.
		if len(h.out) >= cap(h.out)/2 {
			keep := min(len(h.out), windowSize)
			h.rd = copy(h.out, h.out[len(h.out)-keep:])
			h.out = h.out[:h.rd]
		}
		h.out, h.final, h.err = block(&h.b, h.out, &h.lit, &h.dist)
		if h.err != nil {
			h.out = h.out[:h.rd]
		}
	}
	n := copy(p, h.out[h.rd:])
	h.rd += n
	return n, nil
}

// SetStop makes Read stop before decoding a block that starts at bit
// offset bit of data (−1: never stop). A stop that is not at a block's
// start is passed over.
func (h *Head) SetStop(bit int64) { h.stop = bit }

// BitPos returns the bit offset in data of the next block to decode
// (exact between blocks, which is where Read decodes the next one).
func (h *Head) BitPos() int64 { return h.b.bitPos() }

// Drained reports whether all the output decoded so far has been read
// (BitPos is then where the next output begins).
func (h *Head) Drained() bool { return h.rd == len(h.out) }

// Consumed returns how many bytes of data the decoder has loaded (its
// position in the compressed data, up to 8 bytes ahead of what it has
// used).
func (h *Head) Consumed() int64 { return int64(h.b.pos) }

// End returns the byte offset in data just after the deflate stream once
// Read has returned io.EOF (where a gzip trailer begins).
func (h *Head) End() int { return h.b.pos - int(h.b.n/8) }

var errHeader = errors.New("gzsplit: not a gzip member header")

// MemberData returns the byte offset of the deflate data of the gzip
// member at the start of data, after its header and optional fields
// (RFC 1952 §2.3: FEXTRA, FNAME, FCOMMENT, FHCRC).
func MemberData(data []byte) (int, error) {
	if len(data) < 10 || data[0] != 0x1f || data[1] != 0x8b || data[2] != 8 || data[3]&0xe0 != 0 {
		return 0, errHeader
	}
	flg := data[3]
	p := 10
	if flg&4 != 0 { // FEXTRA
		if p+2 > len(data) {
			return 0, errHeader
		}
		p += 2 + (int(data[p]) | int(data[p+1])<<8)
	}
	for _, bit := range []byte{8, 16} { // FNAME, FCOMMENT: zero-terminated
		if flg&bit == 0 {
			continue
		}
		for p < len(data) && data[p] != 0 {
			p++
		}
		p++
	}
	if flg&2 != 0 { // FHCRC
		p += 2
	}
	if p >= len(data) {
		return 0, errHeader
	}
	return p, nil
}
