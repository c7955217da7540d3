package gzruns

import (
	"encoding/binary"
	"slices"
)

const (
	endOfBlock = 256
	numLit     = 286 // literal/length symbols (RFC 1951 §3.2.5)
	numDist    = 4   // distance symbols written: 0…3, symbol 3 is distance 4
	maxLitLen  = 15  // longest literal/length code (§3.2.7)
	maxCLLen   = 7   // longest code-length code
)

// clOrder is the order of the code-length code lengths (RFC 1951 §3.2.7).
var clOrder = [19]uint8{16, 17, 18, 0, 8, 7, 9, 6, 10, 5, 11, 4, 12, 3, 13, 2, 14, 1, 15}

// lengthSym[L−3] is the length symbol (257…285) of a match of length L,
// lengthExtra its extra bits and lengthBase the length of its symbol
// with extra bits 0 (RFC 1951 §3.2.5).
var (
	lengthSym   [256]uint16
	lengthBase  = [29]uint16{3, 4, 5, 6, 7, 8, 9, 10, 11, 13, 15, 17, 19, 23, 27, 31, 35, 43, 51, 59, 67, 83, 99, 115, 131, 163, 195, 227, 258}
	lengthExtra = [29]uint8{0, 0, 0, 0, 0, 0, 0, 0, 1, 1, 1, 1, 2, 2, 2, 2, 3, 3, 3, 3, 4, 4, 4, 4, 5, 5, 5, 5, 0}
)

func init() {
	for i := range lengthBase {
		hi := 258
		if i+1 < len(lengthBase) && i != 27 {
			hi = int(lengthBase[i+1]) - 1
		}
		if i == 27 {
			hi = 257 // 227 + 31; 258 has its own symbol
		}
		for l := int(lengthBase[i]); l <= hi; l++ {
			lengthSym[l-3] = uint16(257 + i)
		}
	}
}

// code is a Huffman code, its bits reversed for deflate's LSB-first bit
// order.
type code struct {
	code uint16
	len  uint8
}

// blockCodes holds the counts and codes of one dynamic block, reused
// from block to block.
type blockCodes struct {
	freq [numLit]int32
	lit  [numLit]code
	// litTab[b] is the code of literal b, bits in the low 16 bits and
	// length above.
	litTab [256]uint32
	lens   [numLit + numDist]uint8
	nlit   int
	clen   [19]uint8
	clc    [19]code
	build  []node // scratch of huffLengths
	ord    []int
}

// count takes the symbol counts of a block: p's bytes outside runs as
// literals, each run's matches, the end of block.
func (c *blockCodes) count(p []byte, runs []run) {
	// Four tables, so that consecutive equal bytes do not wait on each
	// other's increment.
	var h [4][256]int32
	bytes := func(q []byte) {
		for len(q) >= 4 {
			h[0][q[0]]++
			h[1][q[1]]++
			h[2][q[2]]++
			h[3][q[3]]++
			q = q[4:]
		}
		for _, b := range q {
			h[0][b]++
		}
	}
	c.freq = [numLit]int32{}
	at := 0
	for _, r := range runs {
		bytes(p[at:r.at])
		forMatches(r.n, func(l int) { c.freq[lengthSym[l-3]]++ })
		at = r.at + r.n
	}
	bytes(p[at:])
	for b := range 256 {
		c.freq[b] = h[0][b] + h[1][b] + h[2][b] + h[3][b]
	}
	c.freq[endOfBlock]++
}

// forMatches calls f with the lengths (3…258) of the matches that code a
// run of n ≥ 3 bytes: 258 while more than 260 are left, then one or two
// matches for the rest (259 and 260 as 256+3 and 257+3).
func forMatches(n int, f func(l int)) {
	for n > 260 {
		f(258)
		n -= 258
	}
	if n > 258 {
		f(n - 3)
		n = 3
	}
	f(n)
}

// setup makes the codes of the counted block: literal/length lengths
// limited to 15 bits, the distance code (symbols 0 and 3, one bit each:
// a complete code, though only distance 4 is used), and the code-length
// code of both (limited to 7 bits).
func (c *blockCodes) setup() {
	c.nlit = numLit
	for c.nlit > 257 && c.freq[c.nlit-1] == 0 {
		c.nlit--
	}
	c.huffLengths(c.freq[:c.nlit], maxLitLen, c.lens[:c.nlit])
	canonical(c.lens[:c.nlit], c.lit[:c.nlit])
	for i := range c.litTab {
		c.litTab[i] = uint32(c.lit[i].code) | uint32(c.lit[i].len)<<16
	}
	d := c.lens[c.nlit : c.nlit+numDist]
	d[0], d[1], d[2], d[3] = 1, 0, 0, 1
	var cf [19]int32
	for _, l := range c.lens[:c.nlit+numDist] {
		cf[l]++
	}
	c.huffLengths(cf[:], maxCLLen, c.clen[:])
	canonical(c.clen[:], c.clc[:])
}

// writeHeader writes the block header (not final, dynamic codes) and the
// code definitions (RFC 1951 §3.2.7), each length coded alone (the
// repeat codes 16–18 are not used).
func (c *blockCodes) writeHeader(b *bitWriter) {
	nclen := 19
	for nclen > 4 && c.clen[clOrder[nclen-1]] == 0 {
		nclen--
	}
	b.put(2<<1, 3) // BFINAL 0, BTYPE 10
	b.put(uint64(c.nlit-257), 5)
	b.put(numDist-1, 5)
	b.put(uint64(nclen-4), 4)
	for _, s := range clOrder[:nclen] {
		b.put(uint64(c.clen[s]), 3)
	}
	for _, l := range c.lens[:c.nlit+numDist] {
		e := c.clc[l]
		b.put(uint64(e.code), uint(e.len))
	}
}

// literals writes the bytes of p as literals. Three codes (at most 45
// bits) are added to fewer than 8 pending bits between two stores of the
// whole bytes (as fast Huffman encoders do; the store writes 8 bytes, of
// which only the whole ones are kept).
func (c *blockCodes) literals(b *bitWriter, p []byte) {
	b.spill()
	if cap(b.out)-len(b.out) < 2*len(p)+16 {
		b.out = slices.Grow(b.out, 2*len(p)+16)
	}
	out := b.out[:cap(b.out)]
	pos, acc, n := len(b.out), b.acc, b.n
	tab := &c.litTab
	le := binary.LittleEndian
	for len(p) >= 3 {
		e0, e1, e2 := tab[p[0]], tab[p[1]], tab[p[2]]
		acc |= uint64(e0&0xffff) << n
		n += uint(e0 >> 16)
		acc |= uint64(e1&0xffff) << n
		n += uint(e1 >> 16)
		acc |= uint64(e2&0xffff) << n
		n += uint(e2 >> 16)
		le.PutUint64(out[pos:], acc)
		k := n >> 3
		pos += int(k)
		acc >>= k * 8
		n &= 7
		p = p[3:]
	}
	b.out, b.acc, b.n = out[:pos], acc, n
	for _, x := range p { // at most 2 left
		b.put(uint64(c.lit[x].code), uint(c.lit[x].len))
	}
}

// match writes the matches of a run of n bytes at distance 4.
func (c *blockCodes) match(b *bitWriter, n int) {
	forMatches(n, func(l int) {
		s := lengthSym[l-3]
		e := c.lit[s]
		b.put(uint64(e.code), uint(e.len))
		if x := lengthExtra[s-257]; x > 0 {
			b.put(uint64(l-int(lengthBase[s-257])), uint(x))
		}
		b.put(1, 1) // distance symbol 3: code 1
	})
}

// node is a node of the Huffman tree built by huffLengths.
type node struct {
	freq   int64
	parent int32
}

// huffLengths sets lens to the lengths of a Huffman code for the counts
// freq (0: unused symbol), none longer than limit. At least two symbols
// get a code, so that the code is complete (a count of 0 is raised to 1
// for the first unused symbols when fewer than two are used). When the
// optimal code is too deep, the counts are halved (rounding up) and the
// code is built again, which flattens it (as zlib's and others'
// encoders do in effect).
func (c *blockCodes) huffLengths(freq []int32, limit int, lens []uint8) {
	c.ord = c.ord[:0]
	for s, f := range freq {
		if f > 0 {
			c.ord = append(c.ord, s)
		}
	}
	for s := 0; len(c.ord) < 2; s++ {
		if freq[s] == 0 && !slices.Contains(c.ord, s) {
			c.ord = append(c.ord, s)
		}
	}
	w := make([]int64, len(freq)) // the counts used, halved as needed
	for _, s := range c.ord {
		w[s] = max(int64(freq[s]), 1)
	}
	for {
		slices.SortFunc(c.ord, func(a, b int) int {
			if w[a] != w[b] {
				if w[a] < w[b] {
					return -1
				}
				return 1
			}
			return a - b
		})
		if deepest := c.depths(c.ord, w, lens); deepest <= limit {
			return
		}
		for _, s := range c.ord {
			w[s] = (w[s] + 1) / 2
		}
	}
}

// depths builds the Huffman tree of the symbols ord (sorted by weight w)
// with the two-queue method, writes each symbol's depth to lens (0 for
// the others) and returns the largest.
func (c *blockCodes) depths(ord []int, w []int64, lens []uint8) int {
	n := len(ord)
	c.build = c.build[:0]
	for _, s := range ord {
		c.build = append(c.build, node{w[s], -1})
	}
	// Leaves are 0…n−1 (ascending), inner nodes n…2n−2 (ascending, as
	// they are made).
	leaf, inner := 0, n
	pick := func() int {
		if leaf < n && (inner >= len(c.build) || c.build[leaf].freq <= c.build[inner].freq) {
			leaf++
			return leaf - 1
		}
		inner++
		return inner - 1
	}
	for len(c.build) < 2*n-1 {
		a := pick()
		b := pick()
		k := int32(len(c.build))
		c.build = append(c.build, node{c.build[a].freq + c.build[b].freq, -1})
		c.build[a].parent, c.build[b].parent = k, k
	}
	for i := range lens {
		lens[i] = 0
	}
	deepest := 0
	depth := make([]int, len(c.build))
	for k := len(c.build) - 2; k >= 0; k-- {
		depth[k] = depth[c.build[k].parent] + 1
	}
	for i, s := range ord {
		d := depth[i]
		deepest = max(deepest, d)
		lens[s] = uint8(min(d, 255))
	}
	return deepest
}

// canonical assigns the canonical codes of RFC 1951 §3.2.2 to the
// lengths lens, bits reversed.
func canonical(lens []uint8, codes []code) {
	var count [16]int
	for _, l := range lens {
		count[l]++
	}
	count[0] = 0
	var next [16]int
	c := 0
	for l := 1; l < 16; l++ {
		c = (c + count[l-1]) << 1
		next[l] = c
	}
	for s, l := range lens {
		if l == 0 {
			codes[s] = code{}
			continue
		}
		codes[s] = code{reverse(uint16(next[l]), l), l}
		next[l]++
	}
}

func reverse(v uint16, n uint8) uint16 {
	var r uint16
	for range n {
		r = r<<1 | v&1
		v >>= 1
	}
	return r
}

// bitWriter packs deflate's LSB-first bits into out.
type bitWriter struct {
	acc uint64
	n   uint
	out []byte
}

// put appends the k ≤ 16 low bits of v.
func (b *bitWriter) put(v uint64, k uint) {
	b.acc |= v << b.n
	b.n += k
	if b.n >= 48 {
		b.out = binary.LittleEndian.AppendUint64(b.out, b.acc)
		b.out = b.out[:len(b.out)-2]
		b.acc >>= 48
		b.n -= 48
	}
}

// spill writes out the whole bytes pending, leaving fewer than 8 bits.
func (b *bitWriter) spill() {
	for b.n >= 8 {
		b.out = append(b.out, byte(b.acc))
		b.acc >>= 8
		b.n -= 8
	}
}

// align writes out the bits pending, padded with 0 to a byte boundary.
func (b *bitWriter) align() {
	for b.n > 0 {
		b.out = append(b.out, byte(b.acc))
		b.acc >>= 8
		b.n -= min(b.n, 8)
	}
	b.acc = 0
}
