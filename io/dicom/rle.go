package dicom

import (
	"encoding/binary"
	"errors"
	"fmt"
)

// errCodec marks malformed compressed pixel data; the caller adds the file.
var errCodec = errors.New("malformed compressed pixel data")

func codecErr(format string, a ...any) error {
	return fmt.Errorf("%w: %s", errCodec, fmt.Sprintf(format, a...))
}

// decodeRLE decodes one frame of RLE Lossless data (DICOM PS3.5 Annex G)
// into dst as little-endian samples of bytesPer bytes: the 64-byte RLE
// header (G.5: the number of segments, then 15 segment offsets), and one
// PackBits segment (G.3.1) per byte of a sample, most significant byte
// first (G.2), each decoding to exactly rows·cols bytes. dst must hold
// n·bytesPer bytes; n is rows·cols.
func decodeRLE(dst []byte, src []byte, n, bytesPer int) error {
	if n < 1 || len(dst) < n*bytesPer {
		return codecErr("RLE frame for %d samples of %d bytes into %d bytes", n, bytesPer, len(dst))
	}
	if len(src) < 64 {
		return codecErr("RLE frame of %d bytes is shorter than its 64-byte header", len(src))
	}
	segs := int(binary.LittleEndian.Uint32(src))
	if segs != bytesPer {
		return codecErr("RLE header lists %d segments; %d-bit grey-scale samples need %d", segs, 8*bytesPer, bytesPer)
	}
	var off [16]int
	for i := 0; i < segs; i++ {
		o := binary.LittleEndian.Uint32(src[4+4*i:])
		if o < 64 || int64(o) > int64(len(src)) || i > 0 && int(o) <= off[i-1] {
			return codecErr("RLE segment %d starts at byte %d of a %d-byte frame", i+1, o, len(src))
		}
		off[i] = int(o)
	}
	off[segs] = len(src)
	for i := 0; i < segs; i++ {
		// Segment i holds byte (bytesPer-1-i) of every little-endian sample.
		if err := unpackBits(dst[bytesPer-1-i:], bytesPer, src[off[i]:off[i+1]], n); err != nil {
			return fmt.Errorf("%w (segment %d of %d)", err, i+1, segs)
		}
	}
	return nil
}

// unpackBits decodes a PackBits segment (PS3.5 G.3.1) of n bytes into
// dst[0], dst[stride], dst[2·stride], ... A segment may end with padding
// (an even length, G.5); bytes after the n-th are ignored.
func unpackBits(dst []byte, stride int, seg []byte, n int) error {
	got, i := 0, 0
	for got < n {
		if i >= len(seg) {
			return codecErr("RLE segment decodes to %d bytes, %d expected", got, n)
		}
		h := int8(seg[i])
		i++
		switch {
		case h >= 0: // literal run of h+1 bytes
			c := int(h) + 1
			if i+c > len(seg) || got+c > n {
				return codecErr("RLE literal run of %d bytes overruns the segment or the frame", c)
			}
			for _, b := range seg[i : i+c] {
				dst[got*stride] = b
				got++
			}
			i += c
		case h != -128: // replicate the next byte 1-h times
			c := 1 - int(h)
			if i >= len(seg) || got+c > n {
				return codecErr("RLE replicate run of %d bytes overruns the segment or the frame", c)
			}
			b := seg[i]
			i++
			for k := 0; k < c; k++ {
				dst[got*stride] = b
				got++
			}
		}
	}
	return nil
}
