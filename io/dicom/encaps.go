package dicom

import (
	"bytes"
	"context"
	"encoding/binary"
	"fmt"
	"image"
	"image/jpeg"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"time"

	"github.com/tauvox/tauvox/internal/regular"
)

// Compressed transfer syntaxes (PS3.5 §10, Table A-1 / PS3.6 Annex A).
const (
	tsRLE           = "1.2.840.10008.1.2.5"
	tsJPEGBaseline  = "1.2.840.10008.1.2.4.50"
	tsJPEGExtended  = "1.2.840.10008.1.2.4.51"
	tsJPEGLossless  = "1.2.840.10008.1.2.4.57"
	tsJPEGLosslessS = "1.2.840.10008.1.2.4.70"
	tsJPEGLSLossess = "1.2.840.10008.1.2.4.80"
	tsJPEGLSNear    = "1.2.840.10008.1.2.4.81"
	tsJ2KLossless   = "1.2.840.10008.1.2.4.90"
	tsJ2K           = "1.2.840.10008.1.2.4.91"
)

// codec says how a compressed transfer syntax is read.
type codec struct {
	how   string // for provenance
	lossy bool
	tool  []toolCmd
	pkg   string // Debian package(s) of the tools
}

// toolCmd is an external decoder: the program and the arguments before
// the input and output file names.
type toolCmd struct {
	prog string
	args []string
}

var gdcm = toolCmd{"gdcmconv", []string{"--raw"}}

// codecs lists the compressed syntaxes read. RLE and JPEG process 14 are
// decoded here; JPEG-LS and JPEG 2000 by Debian's dcmtk or GDCM when
// installed (no Go decoder of them has been evaluated yet);
// baseline JPEG by Go's image/jpeg.
var codecs = map[string]codec{
	tsRLE:           {how: "RLE Lossless, decoded by tauvox (DICOM PS3.5 Annex G)"},
	tsJPEGLossless:  {how: "JPEG Lossless process 14, decoded by tauvox (ITU-T T.81 Annex H)"},
	tsJPEGLosslessS: {how: "JPEG Lossless process 14 selection value 1, decoded by tauvox (ITU-T T.81 Annex H)"},
	tsJPEGBaseline:  {how: "JPEG Baseline (lossy), decoded by Go image/jpeg", lossy: true},
	tsJPEGExtended:  {how: "JPEG Extended (lossy)", lossy: true, tool: []toolCmd{{"dcmdjpeg", nil}, gdcm}, pkg: "dcmtk or libgdcm-tools"},
	tsJPEGLSLossess: {how: "JPEG-LS Lossless", tool: []toolCmd{{"dcmdjpls", nil}, gdcm}, pkg: "dcmtk or libgdcm-tools"},
	tsJPEGLSNear:    {how: "JPEG-LS near-lossless (lossy)", lossy: true, tool: []toolCmd{{"dcmdjpls", nil}, gdcm}, pkg: "dcmtk or libgdcm-tools"},
	tsJ2KLossless:   {how: "JPEG 2000 Lossless", tool: []toolCmd{gdcm}, pkg: "libgdcm-tools"},
	tsJ2K:           {how: "JPEG 2000 (lossy)", lossy: true, tool: []toolCmd{gdcm}, pkg: "libgdcm-tools"},
}

// lookPath finds an external decoder; tests replace it to act as if the
// tools were not installed.
var lookPath = exec.LookPath

// toolFor returns the first installed tool of c, or false.
func toolFor(c codec) (toolCmd, string, bool) {
	for _, t := range c.tool {
		if p, err := lookPath(t.prog); err == nil {
			return t, p, true
		}
	}
	return toolCmd{}, "", false
}

// checkCodec returns nil when the pixel data of rf can be decoded.
func checkCodec(rf *rawFile) error {
	c, ok := codecs[rf.syn.uid]
	if !ok {
		return unsupportedErr(rf.path, fmt.Sprintf("transfer syntax %s (%s) is not read by tauvox; docs/formats.md lists those that are", rf.syn.name, rf.syn.uid), nil)
	}
	if len(c.tool) > 0 {
		if _, _, ok := toolFor(c); !ok {
			names := ""
			for i, t := range c.tool {
				if i > 0 {
					names += " or "
				}
				names += t.prog
			}
			return unsupportedErr(rf.path, fmt.Sprintf("transfer syntax %s (%s) is decoded by %s, which is not installed (Debian package %s)", rf.syn.name, rf.syn.uid, names, c.pkg), nil)
		}
	}
	return nil
}

// fragments reads the items of encapsulated pixel data (PS3.5 §A.4): the
// Basic Offset Table and the fragments, up to the sequence delimiter.
func fragments(rf *rawFile, maxBytes int64) (offsets []uint32, frags [][]byte, err error) {
	file, err := regular.Open(rf.path)
	if err != nil {
		return nil, nil, &fileError{rf.path, "open", err}
	}
	defer file.Close()
	st, err := file.Stat()
	if err != nil {
		return nil, nil, &fileError{rf.path, "stat", err}
	}
	if st.Size() != rf.size {
		return nil, nil, formatErr(rf.path, fmt.Sprintf("file changed since the scan (%d bytes, was %d)", st.Size(), rf.size), nil)
	}
	pos := rf.dataStart + rf.pix.value
	var hdr [8]byte
	var total int64
	for i := 0; ; i++ {
		if _, err := file.ReadAt(hdr[:], pos); err != nil {
			return nil, nil, formatErr(rf.path, fmt.Sprintf("encapsulated pixel data end without a sequence delimiter at byte %d", pos), io.ErrUnexpectedEOF)
		}
		g, e := binary.LittleEndian.Uint16(hdr[:]), binary.LittleEndian.Uint16(hdr[2:])
		n := int64(binary.LittleEndian.Uint32(hdr[4:]))
		pos += 8
		if g == 0xFFFE && e == 0xE0DD {
			return offsets, frags, nil
		}
		if g != 0xFFFE || e != 0xE000 || n == undefinedLength {
			return nil, nil, formatErr(rf.path, fmt.Sprintf("bad item (%04X,%04X) in encapsulated pixel data at byte %d", g, e, pos-8), nil)
		}
		if pos+n > rf.size {
			return nil, nil, formatErr(rf.path, fmt.Sprintf("truncated: fragment at byte %d declares %d bytes but the file ends at byte %d", pos, n, rf.size), io.ErrUnexpectedEOF)
		}
		total += n
		if total > maxBytes {
			return nil, nil, unsupportedErr(rf.path, fmt.Sprintf("compressed pixel data exceed the memory limit of %d bytes", maxBytes), ErrTooLarge)
		}
		b := make([]byte, n)
		if _, err := file.ReadAt(b, pos); err != nil {
			return nil, nil, &fileError{rf.path, "read", err}
		}
		pos += n
		if i == 0 {
			// PS3.5 A.4: the first item is the Basic Offset Table (may be empty).
			if n%4 != 0 {
				return nil, nil, formatErr(rf.path, fmt.Sprintf("Basic Offset Table of %d bytes is not a list of 32-bit offsets", n), nil)
			}
			for k := int64(0); k < n; k += 4 {
				offsets = append(offsets, binary.LittleEndian.Uint32(b[k:]))
			}
			continue
		}
		frags = append(frags, b)
	}
}

// frameStreams splits the fragments into one byte stream per frame: by
// the Basic Offset Table when given, else one fragment per frame, else
// (one frame) all fragments together (PS3.5 A.4).
func frameStreams(rf *rawFile, offsets []uint32, frags [][]byte, nFrames int) ([][]byte, error) {
	switch {
	case nFrames == 1:
		return [][]byte{bytes.Join(frags, nil)}, nil
	case len(offsets) == nFrames:
		// Offsets count the bytes of items (with their 8-byte headers)
		// from the first fragment's item tag.
		var starts []int64
		var at int64
		for _, f := range frags {
			starts = append(starts, at)
			at += 8 + int64(len(f))
		}
		out := make([][]byte, nFrames)
		k := 0
		for fr := 0; fr < nFrames; fr++ {
			end := at
			if fr+1 < nFrames {
				end = int64(offsets[fr+1])
			}
			if k >= len(frags) || starts[k] != int64(offsets[fr]) {
				return nil, formatErr(rf.path, fmt.Sprintf("Basic Offset Table entry %d (%d) is not the start of a fragment", fr+1, offsets[fr]), nil)
			}
			for k < len(frags) && starts[k] < end {
				out[fr] = append(out[fr], frags[k]...)
				k++
			}
		}
		return out, nil
	case len(frags) == nFrames:
		return frags, nil
	}
	return nil, formatErr(rf.path, fmt.Sprintf("%d fragments for %d frames and no Basic Offset Table to tell them apart", len(frags), nFrames), nil)
}

// readCompressed returns the pixel data of f decoded to native
// little-endian samples of bytesPerSample(f) bytes, all frames.
func readCompressed(f *fileInfo, maxBytes int64) ([]byte, error) {
	rf := f.raw
	c := codecs[rf.syn.uid]
	bps := bytesPerSample(f)
	n := f.rows * f.cols
	need := int64(n) * int64(f.nFrames) * int64(bps)
	if need > maxBytes {
		return nil, unsupportedErr(rf.path, fmt.Sprintf("pixel data of %d bytes exceed the memory limit of %d bytes", need, maxBytes), ErrTooLarge)
	}
	if len(c.tool) > 0 {
		return decodeWithTool(f, c, need)
	}
	offsets, frags, err := fragments(rf, maxBytes)
	if err != nil {
		return nil, err
	}
	streams, err := frameStreams(rf, offsets, frags, f.nFrames)
	if err != nil {
		return nil, err
	}
	out := make([]byte, need)
	for k, s := range streams {
		dst := out[int64(k)*int64(n*bps) : int64(k+1)*int64(n*bps)]
		switch rf.syn.uid {
		case tsRLE:
			err = decodeRLE(dst, s, n, bps)
		case tsJPEGLossless, tsJPEGLosslessS:
			if bps > 2 {
				return nil, unsupportedErr(rf.path, fmt.Sprintf("JPEG lossless with BitsAllocated %d", 8*bps), nil)
			}
			err = decodeLosslessJPEG(dst, s, f.rows, f.cols, bps)
		case tsJPEGBaseline:
			err = decodeBaseline(dst, s, f.rows, f.cols, bps)
		}
		if err != nil {
			where := ""
			if f.nFrames > 1 {
				where = fmt.Sprintf("frame %d: ", k+1)
			}
			return nil, formatErr(rf.path, fmt.Sprintf("%s%s: %v", where, rf.syn.name, err), nil)
		}
	}
	return out, nil
}

// decodeBaseline decodes an 8-bit grey-scale baseline JPEG frame with Go's
// image/jpeg.
func decodeBaseline(dst, src []byte, rows, cols, bps int) error {
	im, err := jpeg.Decode(bytes.NewReader(src))
	if err != nil {
		return codecErr("%v", err)
	}
	g, ok := im.(*image.Gray)
	if !ok || bps != 1 {
		return codecErr("baseline JPEG that is not 8-bit grey-scale")
	}
	if b := g.Bounds(); b.Dx() != cols || b.Dy() != rows {
		return codecErr("JPEG image is %d×%d; the DICOM header says %d×%d", b.Dx(), b.Dy(), cols, rows)
	}
	for y := 0; y < rows; y++ {
		copy(dst[y*cols:(y+1)*cols], g.Pix[y*g.Stride:y*g.Stride+cols])
	}
	return nil
}

// toolTimeout bounds one external decoder run.
const toolTimeout = 2 * time.Minute

// decodeWithTool runs the installed decoder of c on the file of f into a
// temporary file (removed afterwards) and reads its native pixel data.
func decodeWithTool(f *fileInfo, c codec, need int64) ([]byte, error) {
	rf := f.raw
	t, prog, ok := toolFor(c)
	if !ok {
		return nil, checkCodec(rf)
	}
	dir, err := os.MkdirTemp("", "tauvox-decode-")
	if err != nil {
		return nil, &fileError{rf.path, "decode", err}
	}
	defer os.RemoveAll(dir)
	out := filepath.Join(dir, "native.dcm")
	ctx, cancel := context.WithTimeout(context.Background(), toolTimeout)
	defer cancel()
	cmd := exec.CommandContext(ctx, prog, append(append([]string(nil), t.args...), rf.path, out)...)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Run(); err != nil {
		msg := firstLine(stderr.String())
		return nil, formatErr(rf.path, fmt.Sprintf("%s could not decode %s: %v %s", t.prog, rf.syn.name, err, msg), nil)
	}
	nf, err := readHead(out, 64<<20)
	if err != nil {
		return nil, formatErr(rf.path, fmt.Sprintf("%s wrote an unreadable file: %v", t.prog, err), nil)
	}
	if nf.syn.encapsulated || !nf.pix.found || nf.pix.tag != 0x7FE00010 {
		return nil, formatErr(rf.path, fmt.Sprintf("%s did not write native pixel data", t.prog), nil)
	}
	g := *f
	g.raw = nf
	buf, err := readPixels(&g, nil, need)
	if err != nil {
		return nil, formatErr(rf.path, fmt.Sprintf("%s output: %v", t.prog, err), nil)
	}
	if nf.syn.bo == binary.BigEndian {
		swapBytes(buf, bytesPerSample(f))
	}
	return buf, nil
}

func swapBytes(b []byte, size int) {
	for i := 0; i+size <= len(b); i += size {
		for a, z := i, i+size-1; a < z; a, z = a+1, z-1 {
			b[a], b[z] = b[z], b[a]
		}
	}
}

func firstLine(s string) string {
	if i := bytes.IndexByte([]byte(s), '\n'); i >= 0 {
		s = s[:i]
	}
	if len(s) > 200 {
		s = s[:200]
	}
	return s
}
