package preview

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"hash/adler32"
	"hash/crc32"
	"image"
	"io"
	"sync"

	"github.com/klauspost/compress/flate"
)

// encodePNG writes an opaque img (every alpha 255, as a montage always
// is) as an 8-bit PNG (W3C Portable Network Graphics Specification, 2nd
// edition, ISO/IEC 15948:2003) without interlace: of colour type 3 (a
// palette and one index byte per pixel) when the image has at most 256
// colours, as a montage drawn from one colour table has, else of colour
// type 2 (RGB). The palette lists the colours in the order they first
// occur (rows top to bottom, pixels left to right), so the file follows
// from the pixels alone. One byte per pixel instead of three is a third of
// the data to compress: on the 256×256×24 maps of docs/benchmarks.md,
// about half the time and two thirds of the file of RGB.
//
// Scanlines are not filtered (filter type 0): a montage
// repeats every row of a zoomed slice and every pixel of a zoomed voxel,
// which the LZ77 stage matches directly; on a 128×128×24 T2 map the
// filters Sub, Up and Paeth all gave larger files (measured in RGB: 499 KB
// unfiltered, 621 KB Sub, 1.2 MB Up, 628 KB Paeth at level 1). The data
// are compressed with klauspost/compress's deflate at its fastest level,
// several times faster than image/png's encoder (which tries five
// filters per row) and, on such maps, a smaller file. Any PNG decoder
// reads the result; the tests decode it with image/png.
//
// A large image is compressed in parts of whole rows at once (one per
// 2 MiB of scanlines, up to 4), as independent deflate streams joined into one zlib stream (the
// method of parallel gzip compressors): every part but the last ends with
// a sync flush (an empty stored block, RFC 1951 §3.2.4, so the next part
// starts on a byte), no part refers back into another, and the Adler-32
// of the whole is combined from those of the parts (adler32Combine). The
// last montage of a fit is then not left to one CPU while the other
// idles.
func encodePNG(w io.Writer, img *image.RGBA) error {
	b := img.Bounds()
	width, height := b.Dx(), b.Dy()
	pal, isIndexed := indexed(img)
	bpp, ctype := 3, byte(2)
	if isIndexed {
		bpp, ctype = 1, 3
	}
	bw := bufio.NewWriterSize(w, 64<<10)
	bw.Write([]byte("\x89PNG\r\n\x1a\n"))
	var ihdr [13]byte
	binary.BigEndian.PutUint32(ihdr[0:], uint32(width))
	binary.BigEndian.PutUint32(ihdr[4:], uint32(height))
	ihdr[8], ihdr[9] = 8, ctype // bit depth, colour type; compression, filter, interlace 0
	writeChunk(bw, "IHDR", ihdr[:])
	if isIndexed {
		plte := make([]byte, 0, 3*len(pal.colors))
		for _, c := range pal.colors {
			plte = append(plte, byte(c), byte(c>>8), byte(c>>16))
		}
		writeChunk(bw, "PLTE", plte)
	}
	stride := 1 + width*bpp
	// The parts follow from the size alone, so the file is the same on
	// any machine.
	k := min(max(height*stride/minPartBytes, 1), maxParts, height)
	parts := make([]pngPart, k)
	var wg sync.WaitGroup
	for i := range parts {
		y0, y1 := height*i/k, height*(i+1)/k
		wg.Add(1)
		go func() {
			defer wg.Done()
			parts[i] = compressRows(img, y0, y1, i == k-1, pal) // pal is nil for RGB
		}()
	}
	wg.Wait()
	cw := &chunkWriter{w: bw, buf: make([]byte, 0, 64<<10)}
	cw.Write([]byte{0x78, 0x01}) // zlib header: deflate, 32 KiB window, fastest (RFC 1950)
	var sum uint32 = 1           // the Adler-32 of no data
	for _, p := range parts {
		if p.err != nil {
			return p.err
		}
		cw.Write(p.data)
		sum = adler32Combine(sum, p.adler, p.n)
	}
	var tail [4]byte
	binary.BigEndian.PutUint32(tail[:], sum)
	cw.Write(tail[:])
	cw.flush()
	writeChunk(bw, "IEND", nil)
	if cw.err != nil {
		return cw.err
	}
	return bw.Flush()
}

const (
	minPartBytes = 2 << 20 // scanline bytes per part
	maxParts     = 4
)

// pngPart is the compressed scanlines of some rows: raw deflate data,
// with the Adler-32 and length of the scanline bytes.
type pngPart struct {
	data  []byte
	adler uint32
	n     int64
	err   error
}

// compressRows compresses the scanlines of rows y0…y1−1 of img (relative
// to its bounds) as deflate data that ends with the final block (last) or
// a sync flush: palette indices of pal, or RGB when pal is nil.
func compressRows(img *image.RGBA, y0, y1 int, last bool, pal *palette) pngPart {
	b := img.Bounds()
	width := b.Dx()
	var out bytes.Buffer
	fw, err := flate.NewWriter(&out, flate.BestSpeed)
	if err != nil {
		return pngPart{err: err}
	}
	sum := adler32.New()
	bpp := 3
	if pal != nil {
		bpp = 1
	}
	line := make([]byte, 1+bpp*width) // line[0] = 0: filter type None
	for y := y0; y < y1; y++ {
		if pal != nil {
			copy(line[1:], pal.index[y*width:(y+1)*width])
		} else {
			off := img.PixOffset(b.Min.X, b.Min.Y+y)
			pix := img.Pix[off : off+4*width]
			for x := 0; x < width; x++ {
				line[1+3*x], line[2+3*x], line[3+3*x] = pix[4*x], pix[4*x+1], pix[4*x+2]
			}
		}
		fw.Write(line)
		sum.Write(line)
	}
	if last {
		err = fw.Close()
	} else {
		err = fw.Flush()
	}
	return pngPart{data: out.Bytes(), adler: sum.Sum32(), n: int64(y1-y0) * int64(len(line)), err: err}
}

// palette is an opaque image of at most 256 colours as PNG's colour type 3
// holds it: the colours (RGB in the low 24 bits, in the order they first
// occur) and one index per pixel, row after row.
type palette struct {
	colors []uint32
	index  []byte
}

// lutBits is the size of indexed's table from colour to index: 2^14
// slots for at most 256 colours, few enough for the fast caches and sparse
// enough that a multiplier without collisions is found in a few tries.
const lutBits = 14

// indexed returns the palette and indices of an opaque img, or false when
// it has more than 256 colours. One pass: each pixel's colour is looked up
// in a table at a slot its multiplicative hash names, where no two colours
// of the palette collide (on a collision the table is rebuilt with the
// next multiplier), so that a colour already seen costs a multiply, two
// loads and a compare. The indices do not depend on the multipliers.
func indexed(img *image.RGBA) (*palette, bool) {
	b := img.Bounds()
	w, h := b.Dx(), b.Dy()
	p := &palette{index: make([]byte, w*h), colors: make([]uint32, 0, 256)}
	lut := make([]uint16, 1<<lutBits) // index+1 of the colour in the slot (0: empty)
	mul := uint32(0x9e3779b1)
	slot := func(c uint32) uint32 { return (c * mul) >> (32 - lutBits) }
	// place puts every colour in the table; false on a collision.
	place := func() bool {
		clear(lut)
		for i, c := range p.colors {
			s := slot(c)
			if lut[s] != 0 {
				return false
			}
			lut[s] = uint16(i + 1)
		}
		return true
	}
	for y := 0; y < h; y++ {
		off := img.PixOffset(b.Min.X, b.Min.Y+y)
		pix := img.Pix[off : off+4*w]
		row := p.index[y*w : y*w+w]
		for x := range row {
			c := binary.LittleEndian.Uint32(pix[4*x:]) & 0xffffff
			if e := lut[slot(c)]; e != 0 && p.colors[e-1] == c {
				row[x] = byte(e - 1)
				continue
			}
			// A colour not seen yet (one seen is at its own slot).
			if len(p.colors) == 256 {
				return nil, false
			}
			p.colors = append(p.colors, c)
			for !place() {
				mul = (mul*0x2c9277b5 + 0xac564b05) | 1 // the next multiplier: an LCG step, made odd
			}
			row[x] = byte(len(p.colors) - 1)
		}
	}
	return p, true
}

// adler32Combine returns the Adler-32 of A followed by B from those of A
// and B and the length of B: zlib's adler32_combine (Adler & Gailly). With
// A's sums a1 = 1 + ΣA, b1 and B's a2, b2: a = a1 + a2 − 1 and
// b = b1 + b2 + len(B)·(a1 − 1), modulo 65521 (RFC 1950 §9).
func adler32Combine(adlerA, adlerB uint32, lenB int64) uint32 {
	const mod = 65521
	rem := uint64(lenB % mod)
	a1, b1 := uint64(adlerA&0xffff), uint64(adlerA>>16)
	a2, b2 := uint64(adlerB&0xffff), uint64(adlerB>>16)
	a := (a1 + a2 + mod - 1) % mod
	bsum := (b1 + b2 + rem*a1 + mod - rem) % mod
	return uint32(bsum<<16 | a)
}

// writeChunk writes one PNG chunk: length, type, data, and the CRC-32 of
// type and data.
func writeChunk(w *bufio.Writer, typ string, data []byte) {
	var n [4]byte
	binary.BigEndian.PutUint32(n[:], uint32(len(data)))
	w.Write(n[:])
	w.WriteString(typ)
	w.Write(data)
	crc := crc32.NewIEEE()
	crc.Write([]byte(typ))
	crc.Write(data)
	binary.BigEndian.PutUint32(n[:], crc.Sum32())
	w.Write(n[:])
}

// chunkWriter cuts the compressed stream into IDAT chunks of up to 64 KiB.
type chunkWriter struct {
	w   *bufio.Writer
	buf []byte
	err error
}

func (c *chunkWriter) Write(p []byte) (int, error) {
	n := len(p)
	for len(p) > 0 {
		k := min(cap(c.buf)-len(c.buf), len(p))
		c.buf = append(c.buf, p[:k]...)
		p = p[k:]
		if len(c.buf) == cap(c.buf) {
			c.flush()
		}
	}
	return n, c.err
}

func (c *chunkWriter) flush() {
	if len(c.buf) > 0 {
		writeChunk(c.w, "IDAT", c.buf)
		c.buf = c.buf[:0]
	}
}
