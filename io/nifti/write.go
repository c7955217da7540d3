package nifti

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"

	"github.com/klauspost/compress/gzip"
	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/io/gzruns"
	"github.com/tauvox/tauvox/volume"
)

// DefaultCompression is the gzip level Write uses for .nii.gz when
// WriteOptions.Compression is 0. BestSpeed was chosen by measurement
// (BenchmarkWriteNiiGz*, Go 1.26, one AMD EPYC core): a noisy
// 128×128×32×16 float32 series (32 MiB) takes 0.38 s at BestSpeed against
// 1.39 s at DefaultCompression for a file 0.7 % larger (91.2 % against
// 90.6 % of the raw size); a 128×128×32 map with NaN background takes
// 26 ms against 52 ms for a file 2.5 % larger.
const DefaultCompression = gzip.BestSpeed

// RunsCompression, as WriteOptions.Compression, compresses with package
// gzruns instead of a gzip level: runs of a repeated sample become
// back-references and every other byte a Huffman-coded literal, with no
// search for other matches. It suits maps (a background of one value
// around noise-like numbers): on the eight 1.57 M-voxel maps of a T2
// fit the files are 0.6 % smaller than at BestSpeed for about 40 % less
// CPU time (docs/benchmarks.md; BenchmarkWriteMap in io/gzruns).
const RunsCompression = -16

// WriteOptions holds the settings of Write. The zero value (and a nil
// *WriteOptions) writes a NIfTI-1 float32 file with an empty description.
type WriteOptions struct {
	// Datatype of the stored samples. Defaults to Float32 if 0. Any type
	// with a non-zero Size is allowed; for the integer types every sample
	// must be a whole number within the type's range (NaN is an error), as
	// for label and status maps. No scaling is written (scl_slope 1,
	// scl_inter 0).
	Datatype Datatype
	// Version is the NIfTI version, 1 or 2. Defaults to 1 if 0.
	Version int
	// Description is stored in descrip. Bytes outside printable ASCII are
	// replaced by '?' and the text is cut to 79 bytes. Defaults to empty.
	Description string
	// IntentCode is stored in intent_code (nifti1.h NIFTI_INTENT_*).
	// Defaults to 0 (none).
	IntentCode int16
	// IntentName is stored in intent_name, sanitised like Description and
	// cut to 15 bytes. Defaults to empty.
	IntentName string
	// TimeStep is pixdim[4] in milliseconds for an image with more than one
	// volume. Defaults to 0 (volumes that are not evenly spaced in time,
	// such as echoes whose times are in the sidecar).
	TimeStep float64
	// Compression is the gzip level for names ending .nii.gz, from
	// gzip.BestSpeed to gzip.BestCompression, gzip.HuffmanOnly, or
	// RunsCompression. Defaults to DefaultCompression if 0.
	Compression int
}

// Write stores im at path as a single-file NIfTI image, gzip-compressed
// when the name ends ".nii.gz" and plain when it ends ".nii" (any other
// name is an error). nil opt means the defaults.
//
// The header carries both transforms, qform_code = sform_code = 1
// (scanner): the sform is im.Affine exactly (to float32 for NIfTI-1), the
// qform its nearest rigid transform with voxel sizes and qfac (see
// nifti1.h method 2); pixdim[1..3] are the voxel sizes, xyzt_units says mm
// and ms, vox_offset is 352 (NIfTI-1) or 544 (NIfTI-2) with no extensions.
//
// The file appears atomically: Write writes a temporary file
// ".<name>.*.tmp" in the same folder, syncs and closes it, then renames it
// over path, replacing any existing file (callers decide whether that is
// allowed). On any error the temporary file is removed and path is left as
// it was.
func Write(path string, im *volume.Image, opt *WriteOptions) error {
	o := opt.withDefaults()
	gz, err := checkWrite(path, im, &o)
	if err != nil {
		return err
	}
	hdr := encodeHeader(im, &o)

	f, err := output.Create(path)
	if err != nil {
		return &fileError{path, "cannot create temporary file", err}
	}
	if err := writeBody(f.File, hdr, im, &o, gz); err != nil {
		f.Abort()
		return &fileError{path, "cannot write", err}
	}
	if err := f.Commit(); err != nil {
		return &fileError{path, "cannot write", err}
	}
	return nil
}

// withDefaults returns a copy of o (nil: the zero options) with the
// defaults filled in: float32, NIfTI-1, DefaultCompression.
func (o *WriteOptions) withDefaults() WriteOptions {
	var w WriteOptions
	if o != nil {
		w = *o
	}
	if w.Datatype == 0 {
		w.Datatype = Float32
	}
	if w.Version == 0 {
		w.Version = 1
	}
	if w.Compression == 0 {
		w.Compression = DefaultCompression
	}
	return w
}

// sampleError reports a sample the chosen datatype cannot hold.
type sampleError struct {
	index int
	value float32
	dt    Datatype
}

func (e *sampleError) Error() string {
	return fmt.Sprintf("sample %d (%g) is not representable as %s", e.index, e.value, e.dt)
}

func checkWrite(path string, im *volume.Image, o *WriteOptions) (gz bool, err error) {
	bad := func(reason string) error { return errors.New(message(path, reason, nil)) }
	if _, err := checkName(path); err != nil {
		return false, err
	}
	if im == nil {
		return false, bad("nil image")
	}
	if err := im.Validate(); err != nil {
		return false, errors.New(message(path, "cannot write", err))
	}
	return checkStream(path, im, o)
}

// writeBody writes header and samples through a buffer (and gzip), then
// closes the gzip stream and flushes, checking each step (output.File
// syncs on Commit).
func writeBody(f *os.File, hdr []byte, im *volume.Image, o *WriteOptions, gz bool) error {
	bw := bufio.NewWriterSize(f, 1<<20)
	var w io.Writer = bw
	var zw io.WriteCloser
	if gz {
		var err error
		if zw, err = newCompressor(bw, o.Compression); err != nil {
			return err
		}
		w = zw
	}
	if _, err := w.Write(hdr); err != nil {
		return err
	}
	if err := writeSamples(w, im.Data, o.Datatype); err != nil {
		return err
	}
	if zw != nil {
		if err := zw.Close(); err != nil {
			return err
		}
	}
	return bw.Flush()
}

// newCompressor returns the gzip writer of level (a gzip level or
// RunsCompression) on w.
func newCompressor(w io.Writer, level int) (io.WriteCloser, error) {
	if level == RunsCompression {
		return gzruns.NewWriter(w), nil
	}
	return gzip.NewWriterLevel(w, level)
}

// writeSamples encodes data as little-endian samples of type dt.
func writeSamples(w io.Writer, data []float32, dt Datatype) error {
	if dt == Float32 && nativeLE {
		// The samples' own memory is their little-endian encoding (the
		// writer must not keep it: io.Writer's contract).
		_, err := w.Write(float32Bytes(data))
		return err
	}
	sz := dt.Size()
	per := chunkBytes / sz
	buf := make([]byte, chunkBytes)
	le := binary.LittleEndian
	lo, hi := intRange(dt)
	for start := 0; start < len(data); start += per {
		part := data[start:min(start+per, len(data))]
		b := buf[:len(part)*sz]
		switch dt {
		case Float32:
			for i, v := range part {
				le.PutUint32(b[4*i:], math.Float32bits(v))
			}
		case Float64:
			for i, v := range part {
				le.PutUint64(b[8*i:], math.Float64bits(float64(v)))
			}
		default:
			for i, v := range part {
				x := float64(v)
				if x != math.Trunc(x) || x < lo || x > hi { // NaN fails the first test
					return &sampleError{start + i, v, dt}
				}
				switch sz {
				case 1:
					b[i] = byte(int64(x))
				case 2:
					le.PutUint16(b[2*i:], uint16(int64(x)))
				case 4:
					le.PutUint32(b[4*i:], uint32(int64(x)))
				case 8:
					if dt == Uint64 {
						le.PutUint64(b[8*i:], uint64(x))
					} else {
						le.PutUint64(b[8*i:], uint64(int64(x)))
					}
				}
			}
		}
		if _, err := w.Write(b); err != nil {
			return err
		}
	}
	return nil
}

// intRange returns the closed range an integer type holds, as float64
// bounds that a float32 sample can be compared with (the 64-bit bounds are
// the nearest float64 values inside the range).
func intRange(dt Datatype) (lo, hi float64) {
	switch dt {
	case Uint8:
		return 0, math.MaxUint8
	case Int8:
		return math.MinInt8, math.MaxInt8
	case Int16:
		return math.MinInt16, math.MaxInt16
	case Uint16:
		return 0, math.MaxUint16
	case Int32:
		return math.MinInt32, math.MaxInt32
	case Uint32:
		return 0, math.MaxUint32
	case Int64:
		return math.MinInt64, math.Nextafter(math.MaxInt64, 0)
	case Uint64:
		return 0, math.Nextafter(math.MaxUint64, 0)
	}
	return math.Inf(-1), math.Inf(1)
}

// sanitize keeps printable ASCII, replaces other bytes by '?', and cuts the
// result to max bytes.
func sanitize(s string, max int) string {
	b := []byte(s)
	for i, c := range b {
		if c < 0x20 || c > 0x7e {
			b[i] = '?'
		}
	}
	if len(b) > max {
		b = b[:max]
	}
	return string(b)
}

// encodeHeader lays out the header, the 4-byte extension flag (0) and any
// padding up to vox_offset, little-endian.
func encodeHeader(im *volume.Image, o *WriteOptions) []byte {
	q, off, spacing, qfac := affineToQuatern(&im.Affine)
	var dim [8]int64
	var pix [8]float64
	dim[0] = 3
	if im.Dims[3] > 1 {
		dim[0] = 4
	}
	for i := range 4 {
		dim[i+1] = int64(im.Dims[i])
	}
	for i := 5; i < 8; i++ {
		dim[i] = 1
	}
	pix[0] = qfac
	copy(pix[1:4], spacing[:])
	for i := 4; i < 8; i++ {
		pix[i] = 1
	}
	if im.Dims[3] > 1 {
		pix[4] = o.TimeStep
	}
	le := binary.LittleEndian
	descrip := sanitize(o.Description, 79)
	iname := sanitize(o.IntentName, 15)
	units := byte(UnitMM | UnitMsec)
	if o.Version == 2 {
		b := make([]byte, sizeV2+4)
		le.PutUint32(b[0:], sizeV2)
		copy(b[4:], magicV2Single)
		le.PutUint16(b[12:], uint16(o.Datatype))
		le.PutUint16(b[14:], uint16(8*o.Datatype.Size()))
		for i, d := range dim {
			le.PutUint64(b[16+8*i:], uint64(d))
		}
		for i, p := range pix {
			le.PutUint64(b[104+8*i:], math.Float64bits(p))
		}
		le.PutUint64(b[168:], sizeV2+4)
		le.PutUint64(b[176:], math.Float64bits(1))
		copy(b[240:320], descrip)
		le.PutUint32(b[344:], XformScanner)
		le.PutUint32(b[348:], XformScanner)
		for i := range 3 {
			le.PutUint64(b[352+8*i:], math.Float64bits(q[i]))
			le.PutUint64(b[376+8*i:], math.Float64bits(off[i]))
			for c := range 4 {
				le.PutUint64(b[400+32*i+8*c:], math.Float64bits(im.Affine[i][c]))
			}
		}
		le.PutUint32(b[500:], uint32(units))
		le.PutUint32(b[504:], uint32(int32(o.IntentCode)))
		copy(b[508:524], iname)
		return b
	}
	b := make([]byte, sizeV1+4)
	put32 := func(off int, v float64) { le.PutUint32(b[off:], math.Float32bits(float32(v))) }
	le.PutUint32(b[0:], sizeV1)
	for i, d := range dim {
		le.PutUint16(b[40+2*i:], uint16(d))
	}
	le.PutUint16(b[68:], uint16(o.IntentCode))
	le.PutUint16(b[70:], uint16(o.Datatype))
	le.PutUint16(b[72:], uint16(8*o.Datatype.Size()))
	for i, p := range pix {
		put32(76+4*i, p)
	}
	put32(108, sizeV1+4)
	put32(112, 1)
	b[123] = units
	copy(b[148:228], descrip)
	le.PutUint16(b[252:], XformScanner)
	le.PutUint16(b[254:], XformScanner)
	for i := range 3 {
		put32(256+4*i, q[i])
		put32(268+4*i, off[i])
		for c := range 4 {
			put32(280+16*i+4*c, im.Affine[i][c])
		}
	}
	copy(b[328:344], iname)
	copy(b[344:], magicV1Single)
	return b
}
