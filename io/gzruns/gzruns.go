package gzruns

import (
	"encoding/binary"
	"errors"
	"hash/crc32"
	"io"
)

// blockBytes is the input of one deflate block: its Huffman code is built
// for these bytes (a code costs about 150 bytes, so blocks of 1 MiB spend
// well under 0.1 % on codes).
const blockBytes = 1 << 20

// minRun is the shortest repetition coded as a match: shorter ones are
// left to the literals (a match costs about as many bits as 2 literals).
const minRun = 16

// Writer compresses what is written to it into one gzip member written
// to the underlying writer. Close writes the member's end. A Writer is
// not safe for concurrent use.
type Writer struct {
	w      io.Writer
	crc    uint32
	size   uint32 // input length modulo 2^32 (ISIZE)
	bits   bitWriter
	runs   []run // the current block's runs
	hdr    bool  // the member header is written
	closed bool
	err    error
	codes  blockCodes
}

// run is a stretch of a block's input [at, at+n) that repeats the 4 bytes
// before it.
type run struct{ at, n int }

// NewWriter returns a Writer that writes a gzip member to w.
func NewWriter(w io.Writer) *Writer {
	z := &Writer{w: w}
	z.bits.out = make([]byte, 0, 1<<16)
	return z
}

// ErrClosed is returned by Write after Close.
var ErrClosed = errors.New("gzruns: write after close")

// Write compresses p. The data are coded at once, in blocks of up to
// blockBytes; p is not kept.
func (z *Writer) Write(p []byte) (int, error) {
	if z.err != nil {
		return 0, z.err
	}
	if z.closed {
		return 0, ErrClosed
	}
	z.header()
	total := len(p)
	z.crc = crc32.Update(z.crc, crc32.IEEETable, p)
	z.size += uint32(len(p))
	for len(p) > 0 {
		n := min(len(p), blockBytes)
		z.block(p[:n])
		p = p[n:]
		if len(z.bits.out) >= 1<<16 {
			z.flush()
		}
	}
	if z.err != nil {
		return 0, z.err
	}
	return total, nil
}

// Close writes the last block (empty, final) and the gzip trailer. It
// does not close the underlying writer.
func (z *Writer) Close() error {
	if z.closed {
		return z.err
	}
	z.closed = true
	if z.err != nil {
		return z.err
	}
	z.header()
	// A final block with fixed codes holding only the end of block
	// (code 256: seven 0 bits; RFC 1951 §3.2.6).
	z.bits.put(1|1<<1, 3)
	z.bits.put(0, 7)
	z.bits.align()
	var t [8]byte
	binary.LittleEndian.PutUint32(t[0:], z.crc)
	binary.LittleEndian.PutUint32(t[4:], z.size)
	z.bits.out = append(z.bits.out, t[:]...)
	z.flush()
	return z.err
}

// header writes the 10-byte member header once: no name, no time, no
// extra fields (RFC 1952 §2.3; OS 255: unknown).
func (z *Writer) header() {
	if !z.hdr {
		z.hdr = true
		z.bits.out = append(z.bits.out, 0x1f, 0x8b, 8, 0, 0, 0, 0, 0, 0, 255)
	}
}

func (z *Writer) flush() {
	if z.err == nil && len(z.bits.out) > 0 {
		_, z.err = z.w.Write(z.bits.out)
	}
	z.bits.out = z.bits.out[:0]
}

// block codes p (1 ≤ len(p) ≤ blockBytes) as one dynamic block.
func (z *Writer) block(p []byte) {
	z.runs = findRuns(z.runs[:0], p)
	c := &z.codes
	c.count(p, z.runs)
	c.setup()
	c.writeHeader(&z.bits)
	at := 0
	for _, r := range z.runs {
		c.literals(&z.bits, p[at:r.at])
		c.match(&z.bits, r.n)
		at = r.at + r.n
	}
	c.literals(&z.bits, p[at:])
	z.bits.put(uint64(c.lit[endOfBlock].code), uint(c.lit[endOfBlock].len))
}

// findRuns appends to runs the stretches of p, in order, of at least
// minRun bytes that repeat the 4 bytes before them (those 4 bytes inside
// p), and returns runs.
//
// It tests every eighth position for 12 bytes of period 4 (one 8-byte
// comparison): a stretch long enough to be kept (minRun + 4 ≥ 12 + 7
// bytes) holds such a position, and is then extended both ways.
func findRuns(runs []run, p []byte) []run {
	le := binary.LittleEndian
	floor := 0 // end of the last run kept: its bytes are not looked at again
	for i := 0; i+12 <= len(p); i += 8 {
		if le.Uint64(p[i:]) != le.Uint64(p[i+4:]) {
			continue
		}
		// p[k] = p[k−4] for k in s+4 … e−1.
		s, e := i, i+12
		for s > floor && p[s-1] == p[s+3] {
			s--
		}
		for e+8 <= len(p) && le.Uint64(p[e:]) == le.Uint64(p[e-4:]) {
			e += 8
		}
		for e < len(p) && p[e] == p[e-4] {
			e++
		}
		if n := e - (s + 4); n >= minRun {
			runs = append(runs, run{s + 4, n})
			floor = e
		}
		i = (e - 4) &^ 7 // the next test that can find a new stretch
	}
	return runs
}
