package dicom

import (
	"compress/flate"
	"encoding/binary"
	"io"
	"math"

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
