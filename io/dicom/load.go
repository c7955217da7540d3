package dicom

import (
	"compress/flate"
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"sort"
	"strings"

	"github.com/tauvox/tauvox/internal/regular"
	"github.com/tauvox/tauvox/volume"
)

// LoadSeries reads the pixel data of the files of s (and no others) and
// returns the series as one image: i = column, j = row, k = slice in
// ascending position along the slice normal, t = volume in ascending
// order of the varying parameter. Samples are RescaleSlope·stored +
// RescaleIntercept, per file (per frame for enhanced files), as float32.
// Acq holds TE, TI, TR and flip angle of each volume (NaN when absent);
// Source holds the series folder, "dicom", the description, field
// strength, scanner and acquisition time.
//
// It refuses a series that Scan found incomplete or unevenly spaced (the
// error names the series and the missing slice and parameter value), a
// compressed transfer syntax (*UnsupportedError naming it), and a series
// larger than ScanOptions.MaxBytes. A file that changed since the scan, or
// whose pixel data are short, gives a *FormatError naming it.
func LoadSeries(s *Series) (*volume.Image, error) {
	if s == nil {
		panic("dicom: LoadSeries of a nil series")
	}
	r, err := OpenSeries(s)
	if err != nil {
		return nil, err
	}
	return r.Load()
}

func bytesPerSample(f *fileInfo) int {
	switch f.raw.pix.tag {
	case 0x7FE00008:
		return 4
	case 0x7FE00009:
		return 8
	}
	return f.bitsAlloc / 8
}

// inflatedFrom returns the inflated data set of the deflated file rf
// (PS3.5 §A.5) positioned at the value of its pixel data element.
func inflatedFrom(file io.ReaderAt, rf *rawFile) (io.ReadCloser, error) {
	zr := flate.NewReader(io.NewSectionReader(file, rf.dataStart, rf.size-rf.dataStart))
	if _, err := io.CopyN(io.Discard, zr, rf.pix.value); err != nil {
		zr.Close()
		return nil, formatErr(rf.path, "deflated data set ends before the pixel data", err)
	}
	return zr, nil
}

// readPixels reads the pixel data of f into buf (grown when short) and
// returns the bytes of all its frames.
func readPixels(f *fileInfo, buf []byte, maxBytes int64) ([]byte, error) {
	rf := f.raw
	path := rf.path
	need := int64(f.rows) * int64(f.cols) * int64(f.nFrames) * int64(bytesPerSample(f))
	vl := int64(rf.pix.vl)
	if need > maxBytes {
		return nil, unsupportedErr(path, fmt.Sprintf("pixel data of %d bytes exceed the memory limit of %d bytes", need, maxBytes), ErrTooLarge)
	}
	if vl < need {
		return nil, formatErr(path, fmt.Sprintf("pixel data has %d bytes but %d frames of %d×%d samples of %d bits need %d",
			vl, f.nFrames, f.cols, f.rows, 8*bytesPerSample(f), need), nil)
	}
	file, err := regular.Open(path)
	if err != nil {
		return nil, &fileError{path, "open", err}
	}
	defer file.Close()
	st, err := file.Stat()
	if err != nil {
		return nil, &fileError{path, "stat", err}
	}
	if st.Size() != rf.size {
		return nil, formatErr(path, fmt.Sprintf("file changed since the scan (%d bytes, was %d)", st.Size(), rf.size), nil)
	}
	if int64(cap(buf)) < need {
		buf = make([]byte, need)
	}
	buf = buf[:need]
	var r io.Reader
	if rf.syn.deflate {
		zr := flate.NewReader(io.NewSectionReader(file, rf.dataStart, rf.size-rf.dataStart))
		defer zr.Close()
		if _, err := io.CopyN(io.Discard, zr, rf.pix.value); err != nil {
			return nil, formatErr(path, "deflated data set ends before the pixel data", err)
		}
		r = zr
	} else {
		r = io.NewSectionReader(file, rf.dataStart+rf.pix.value, need)
	}
	if _, err := io.ReadFull(r, buf); err != nil {
		if err == io.EOF {
			err = io.ErrUnexpectedEOF
		}
		return nil, formatErr(path, fmt.Sprintf("truncated: pixel data declares %d bytes", vl), err)
	}
	return buf, nil
}

// decode converts one frame of stored samples to rescaled float32.
func decode(dst []float32, src []byte, f *fileInfo, fr *frameInfo) {
	slope, icpt := rescale(fr)
	bo := f.raw.syn.bo
	if bo == nil {
		bo = binary.LittleEndian
	}
	if f.raw.pix.tag == 0x7FE00010 && f.bitsAlloc == 16 && f.bitsStored == 16 && bo == binary.LittleEndian {
		decodeLE16(dst, src, f.pixelRep == 1, slope, icpt)
		return
	}
	switch f.raw.pix.tag {
	case 0x7FE00008:
		for i := range dst {
			dst[i] = float32(slope*float64(math.Float32frombits(bo.Uint32(src[4*i:]))) + icpt)
		}
		return
	case 0x7FE00009:
		for i := range dst {
			dst[i] = float32(slope*math.Float64frombits(bo.Uint64(src[8*i:])) + icpt)
		}
		return
	}
	signed := f.pixelRep == 1
	shift := uint(f.bitsAlloc - f.bitsStored) // high bits beyond BitsStored are not part of the value
	switch f.bitsAlloc {
	case 8:
		for i := range dst {
			v := uint8(src[i]) << shift
			var x float64
			if signed {
				x = float64(int8(v) >> shift)
			} else {
				x = float64(v >> shift)
			}
			dst[i] = float32(slope*x + icpt)
		}
	case 16:
		for i := range dst {
			v := bo.Uint16(src[2*i:]) << shift
			var x float64
			if signed {
				x = float64(int16(v) >> shift)
			} else {
				x = float64(v >> shift)
			}
			dst[i] = float32(slope*x + icpt)
		}
	case 32:
		for i := range dst {
			v := bo.Uint32(src[4*i:]) << shift
			var x float64
			if signed {
				x = float64(int32(v) >> shift)
			} else {
				x = float64(v >> shift)
			}
			dst[i] = float32(slope*x + icpt)
		}
	}
}

// pixelNotes says how the pixel data of s are stored and decoded, and
// warns of lossy compression (quantitative values from lossy data).
func (s *Series) pixelNotes() (string, []string) {
	seen := map[string]bool{}
	var hows, warns []string
	for _, fr := range s.frames {
		rf := fr.file.raw
		if seen[rf.syn.uid] {
			continue
		}
		seen[rf.syn.uid] = true
		how := rf.syn.name + " (" + rf.syn.uid + ")"
		if c, ok := codecs[rf.syn.uid]; ok {
			how = c.how + " (" + rf.syn.uid + ")"
			if t, _, ok := toolFor(c); ok && len(c.tool) > 0 {
				how += ", decoded by " + t.prog
			}
			if c.lossy {
				warns = append(warns, fmt.Sprintf("pixel data are lossy compressed (%s): fitted values carry the compression error", rf.syn.name))
			}
		}
		hows = append(hows, how)
	}
	if it := fr0Type(s); strings.HasPrefix(it, "DERIVED") {
		warns = append(warns, "the images are DERIVED (ImageType "+it+"), read because derived images were asked for")
	}
	sort.Strings(hows)
	scale, w := scaling(s.frames)
	return strings.Join(hows, "; ") + "; " + scale, append(warns, w...)
}

// scaling describes how stored values became samples in frames, and
// warns when Real World Value Mapping is present in some images only, or
// when the vendor's private scale slope differs between images with no
// real-world mapping to make them comparable.
func scaling(frames []*frameInfo) (string, []string) {
	var warns []string
	rwv, units := 0, map[string]bool{}
	lo, hi := math.Inf(1), math.Inf(-1)
	notes := map[string]bool{}
	for _, fr := range frames {
		if !math.IsNaN(fr.rwvSlope) {
			rwv++
			units[fr.rwvUnits] = true
		}
		if fr.rwvNote != "" {
			notes[fr.rwvNote] = true
		}
		if !math.IsNaN(fr.privScale) {
			lo, hi = math.Min(lo, fr.privScale), math.Max(hi, fr.privScale)
		}
	}
	for n := range notes {
		warns = append(warns, n)
	}
	desc := "scaling: RescaleSlope/RescaleIntercept"
	switch {
	case rwv == len(frames):
		var us []string
		for u := range units {
			us = append(us, u)
		}
		sort.Strings(us)
		desc = "scaling: Real World Value Mapping slope/intercept (units " + strings.Join(us, ", ") + ")"
		if len(us) > 1 {
			warns = append(warns, "Real World Value Mapping units differ between images: "+strings.Join(us, ", "))
		}
	case rwv > 0:
		desc += " and Real World Value Mapping"
		warns = append(warns, fmt.Sprintf("Real World Value Mapping is present in %d of %d images only; the samples mix real-world and rescaled values", rwv, len(frames)))
	}
	if hi > lo && rwv < len(frames) {
		warns = append(warns, fmt.Sprintf("the private scale slope (2005,100E) differs between images (%g to %g) and no Real World Value Mapping is given: rescaled values of different images may not be comparable", lo, hi))
	}
	if !math.IsInf(lo, 1) {
		desc += fmt.Sprintf("; private scale slope (2005,100E) %g to %g recorded, not applied", lo, hi)
	}
	return desc, warns
}

// fr0Type is the ImageType of the first file of s.
func fr0Type(s *Series) string { return strings.Join(s.frames[0].file.imageType, `\`) }
