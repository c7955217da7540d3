package nifti

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"github.com/klauspost/compress/gzip"
	"hash/crc32"
	"io"
	"math"
	"os"
	"strings"
	"sync/atomic"

	"github.com/tauvox/tauvox/internal/regular"
	"github.com/tauvox/tauvox/volume"
)

// DefaultMaxBytes is the default limit on the in-memory size of the
// samples (as float32) of one image: 2 GiB.
const DefaultMaxBytes = 1 << 31

// chunkBytes is the size of the buffer stored samples are converted from
// (a multiple of every sample size).
const chunkBytes = 64 << 10

// growSamples is the number of samples allocated up front when the stream
// length is unknown (gzip); beyond it the buffer doubles as data arrive,
// so a small file that declares a huge grid cannot claim the memory first.
const growSamples = 1 << 22

// Reader reads NIfTI files with settings. The zero value (and a nil
// *Reader) uses the defaults. A Reader holds no state and may be shared.
type Reader struct {
	// MaxBytes caps the in-memory size (4 bytes per sample) of an image;
	// larger images give an UnsupportedError wrapping ErrTooLarge.
	// Defaults to DefaultMaxBytes if 0 or negative.
	MaxBytes int64
}

func (rd *Reader) maxBytes() int64 {
	if rd == nil || rd.MaxBytes <= 0 {
		return DefaultMaxBytes
	}
	return min(rd.MaxBytes, 1<<60) // keeps samples·8 far from overflow
}

// Read reads a NIfTI-1 or NIfTI-2 image with the default settings. See
// Reader.Read.
func Read(path string) (*volume.Image, error) { return (*Reader)(nil).Read(path) }

// ReadHeader reads and checks the header of a NIfTI file without reading
// the samples. See Reader.ReadHeader.
func ReadHeader(path string) (*Header, error) { return (*Reader)(nil).ReadHeader(path) }

// Decode reads a single-file NIfTI image (plain or gzip-compressed) from r
// with the default settings. See Reader.Decode.
func Decode(r io.Reader, name string, size int64) (*volume.Image, *Header, error) {
	return (*Reader)(nil).Decode(r, name, size)
}

// Read reads the image at path: a single file (.nii, or gzip-compressed
// .nii.gz; compression is recognised by its magic bytes, whatever the
// name) or a .hdr/.img pair (path may name either half; each half may be
// gzip-compressed). The samples are converted to float32 with
// scl_slope/scl_inter applied; the affine is chosen and converted to
// millimetres by Header.Affine. Acq of the result is nil; Source holds the
// path, "nifti" and the header's descrip.
func (rd *Reader) Read(path string) (*volume.Image, error) {
	im, _, err := rd.read(path, true)
	return im, err
}

// ReadHeader reads and checks the header at path (either half of a pair)
// without reading the samples. For an uncompressed file it also checks
// that the file is long enough for the samples the header declares; for a
// compressed one only Read can tell.
func (rd *Reader) ReadHeader(path string) (*Header, error) {
	_, h, err := rd.read(path, false)
	return h, err
}

// Decode reads a single-file NIfTI image from r. name is used only in
// error messages and Source.Path; size is the number of bytes r holds, or
// -1 when unknown (a plain stream shorter than the header declares is then
// found only when it ends). A header whose magic says the samples live in
// a separate .img file gives an UnsupportedError. Decode never panics on
// bad input; it is the entry point of the fuzz test.
func (rd *Reader) Decode(r io.Reader, name string, size int64) (*volume.Image, *Header, error) {
	s, err := newStream(r, name, size)
	if err != nil {
		return nil, nil, err
	}
	h, n, err := rd.header(s, name)
	if err != nil {
		return nil, h, err
	}
	if h.Pair {
		return nil, h, unsupportedErr(name, "header magic says the samples are in a separate .img file", nil)
	}
	if err := s.skipTo(h.VoxOffset, rd.maxBytes()); err != nil {
		return nil, h, err
	}
	if err := s.checkLength(h, n); err != nil {
		return nil, h, err
	}
	im, err := rd.samples(s, h, n)
	if err != nil {
		return nil, h, err
	}
	return im, h, s.finish()
}

func (rd *Reader) read(path string, withData bool) (*volume.Image, *Header, error) {
	hdrPath := path
	if base, gz, ok := cutSuffix(path, ".img"); ok {
		hdrPath = companion(base, ".hdr", gz)
	}
	f, s, err := openStream(hdrPath)
	if err != nil {
		return nil, nil, err
	}
	defer f.Close()
	h, n, err := rd.header(s, hdrPath)
	if err != nil {
		return nil, h, err
	}
	if !h.Pair {
		if err := s.checkLength(h, n); err != nil {
			return nil, h, err
		}
		if !withData {
			return nil, h, nil
		}
		if err := s.skipTo(h.VoxOffset, rd.maxBytes()); err != nil {
			return nil, h, err
		}
		im, err := rd.samples(s, h, n)
		if err != nil {
			return nil, h, err
		}
		return im, h, s.finish()
	}
	base, gz, ok := cutSuffix(hdrPath, ".hdr")
	if !ok {
		return nil, h, formatErr(hdrPath, "header magic says the samples are in a separate .img file, but the name does not end .hdr", nil)
	}
	imgPath := companion(base, ".img", gz)
	g, d, err := openStream(imgPath)
	if err != nil {
		return nil, h, err
	}
	defer g.Close()
	if err := d.checkLength(h, n); err != nil {
		return nil, h, err
	}
	if !withData {
		return nil, h, nil
	}
	if err := d.skipTo(h.VoxOffset, rd.maxBytes()); err != nil {
		return nil, h, err
	}
	im, err := rd.samples(d, h, n)
	if err != nil {
		return nil, h, err
	}
	im.Source.Path = path
	return im, h, d.finish()
}

// cutSuffix splits "x.hdr" or "x.hdr.gz" (any case) into "x" and whether
// ".gz" followed.
func cutSuffix(path, ext string) (base string, gz, ok bool) {
	p := path
	if strings.HasSuffix(strings.ToLower(p), ".gz") {
		p, gz = p[:len(p)-3], true
	}
	if len(p) > len(ext) && strings.EqualFold(p[len(p)-len(ext):], ext) {
		return p[:len(p)-len(ext)], gz, true
	}
	return "", false, false
}

// companion returns base+ext, with ".gz" when that exists or when the
// uncompressed name does not but the other half was compressed.
func companion(base, ext string, gz bool) string {
	plain := base + ext
	if _, err := os.Stat(plain); err == nil {
		return plain
	}
	if _, err := os.Stat(plain + ".gz"); err == nil || gz {
		return plain + ".gz"
	}
	return plain
}

// stream is the byte source of a header or samples: the file or its
// decompressed content, with the position reached.
type stream struct {
	name string
	r    io.Reader
	gz   *gzip.Reader // nil when not compressed
	size int64        // bytes in the (uncompressed) source, -1 if unknown
	pos  int64        // bytes consumed
	// crc tracks the CRC-32 of the decompressed bytes read so far (gzip
	// only), for checking a speculatively decoded end (split.go).
	crc *crcReader
	raw *countReader // the file under it, when opened by openStream
	// named reports a name ending .gz whose content is not gzip, for a
	// clearer error when the header then fails.
	namedGz bool
}

func openStream(path string) (*os.File, *stream, error) {
	f, err := regular.Open(path)
	if err != nil {
		var nr *regular.NotRegularError
		if errors.As(err, &nr) {
			kind := nr.Kind
			if kind == "folder" {
				kind = "directory"
			}
			return nil, nil, formatErr(path, "is a "+kind+", not a NIfTI file", nil)
		}
		return nil, nil, &fileError{path, "cannot open", err}
	}
	fi, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, nil, &fileError{path, "cannot stat", err}
	}
	if fi.IsDir() {
		f.Close()
		return nil, nil, formatErr(path, "is a directory, not a NIfTI file", nil)
	}
	cr := &countReader{r: f}
	s, err := newStream(cr, path, fi.Size())
	if err != nil {
		f.Close()
		return nil, nil, err
	}
	s.raw = cr
	return f, s, nil
}

// countReader counts the bytes read from the file (the compressed
// position of a gzip stream, plus read-ahead). Read by one goroutine.
type countReader struct {
	r io.Reader
	n atomic.Int64
}

func (c *countReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n.Add(int64(n))
	return n, err
}

func newStream(r io.Reader, name string, size int64) (*stream, error) {
	br := bufio.NewReaderSize(r, chunkBytes)
	s := &stream{name: name, r: br, size: size}
	magic, err := br.Peek(2)
	switch {
	case len(magic) == 0 && err == io.EOF:
		return nil, formatErr(name, "empty file", nil)
	case len(magic) < 2 && err != nil && err != io.EOF:
		return nil, &fileError{name, "cannot read", err}
	}
	if len(magic) == 2 && magic[0] == 0x1f && magic[1] == 0x8b { // RFC 1952 ID1 ID2
		z, err := gzip.NewReader(br)
		if err != nil {
			return nil, formatErr(name, "bad gzip stream", err)
		}
		z.Multistream(true)
		s.crc = &crcReader{r: z, on: true}
		s.r, s.gz, s.size = s.crc, z, -1
		return s, nil
	}
	s.namedGz = strings.HasSuffix(strings.ToLower(name), ".gz")
	return s, nil
}

// readFull reads len(b) bytes, returning the count and a read error other
// than a short stream (which the caller words itself).
func (s *stream) readFull(b []byte) (int, error) {
	n, err := io.ReadFull(s.r, b)
	s.pos += int64(n)
	if err == io.EOF || err == io.ErrUnexpectedEOF {
		err = nil
	}
	if err != nil {
		return n, s.readErr(err)
	}
	return n, nil
}

// readErr classifies an error from the source: a corrupt gzip stream is
// malformed content; anything else is a file-system failure.
func (s *stream) readErr(err error) error {
	if s.gz != nil {
		return formatErr(s.name, "corrupt gzip stream", err)
	}
	return &fileError{s.name, "cannot read", err}
}

// header reads, decodes and checks the header, returning it and the number
// of samples.
func (rd *Reader) header(s *stream, name string) (*Header, int64, error) {
	var buf [sizeV2]byte
	n, err := s.readFull(buf[:4])
	if err != nil {
		return nil, 0, err
	}
	if n == 0 {
		return nil, 0, formatErr(name, "empty file", nil)
	}
	if n < 4 {
		return nil, 0, formatErr(name, fmt.Sprintf("header truncated after %d bytes", n), io.ErrUnexpectedEOF)
	}
	version, order, ok := sniff(buf[:4])
	if !ok {
		if s.namedGz {
			return nil, 0, formatErr(name, "the name ends .gz but the content is neither gzip nor a NIfTI header", nil)
		}
		return nil, 0, formatErr(name, fmt.Sprintf("sizeof_hdr is %d, want %d (NIfTI-1) or %d (NIfTI-2)", int32(binary.LittleEndian.Uint32(buf[:4])), sizeV1, sizeV2), nil)
	}
	size := sizeV1
	if version == 2 {
		size = sizeV2
	}
	m, err := s.readFull(buf[4:size])
	if err != nil {
		return nil, 0, err
	}
	if m < size-4 {
		return nil, 0, formatErr(name, fmt.Sprintf("header truncated after %d of %d bytes", 4+m, size), io.ErrUnexpectedEOF)
	}
	h, reason := parseHeader(buf[:size], version, order)
	if h == nil {
		return nil, 0, formatErr(name, reason, nil)
	}
	count, err := h.check(name, rd.maxBytes())
	return h, count, err
}

// checkLength compares the bytes the header declares with the size of an
// uncompressed source, before any allocation.
func (s *stream) checkLength(h *Header, n int64) error {
	if s.size < 0 {
		return nil
	}
	if h.VoxOffset > s.size {
		return formatErr(s.name, fmt.Sprintf("vox_offset %d is beyond the end of the file (%d bytes)", h.VoxOffset, s.size), nil)
	}
	need := n * int64(h.Datatype.Size())
	if have := s.size - h.VoxOffset; need > have {
		return formatErr(s.name, fmt.Sprintf("header declares %d bytes of samples but the file holds %d", need, have), nil)
	}
	return nil
}

// skipTo discards bytes (NIfTI extensions) up to offset off.
func (s *stream) skipTo(off, limit int64) error {
	if off < s.pos {
		return formatErr(s.name, fmt.Sprintf("vox_offset %d lies inside the header", off), nil)
	}
	skip := off - s.pos
	if skip == 0 {
		return nil
	}
	if skip > limit {
		return unsupportedErr(s.name, fmt.Sprintf("vox_offset %d leaves %d bytes of extensions, above the limit of %d bytes", off, skip, limit), ErrTooLarge)
	}
	n, err := io.CopyN(io.Discard, s.r, skip)
	s.pos += n
	if err == io.EOF {
		return formatErr(s.name, fmt.Sprintf("vox_offset %d is beyond the end of the stream (%d bytes)", off, s.pos), io.ErrUnexpectedEOF)
	}
	if err != nil {
		return s.readErr(err)
	}
	return nil
}

// finish verifies the gzip trailer (CRC-32 and length) when the stream
// ends soon after the samples; trailing bytes beyond a few KiB are
// ignored, as for an uncompressed file.
func (s *stream) finish() error {
	if s.gz == nil {
		return nil
	}
	_, err := io.CopyN(io.Discard, s.r, 4096)
	if err == nil || err == io.EOF {
		return nil
	}
	return formatErr(s.name, "corrupt gzip stream", err)
}

// samples reads n stored samples and converts them to float32, applying
// the header's scaling in float64.
func (rd *Reader) samples(s *stream, h *Header, n int64) (*volume.Image, error) {
	dt := h.Datatype
	sz := int64(dt.Size())
	need := n * sz
	initial := n
	if s.size < 0 {
		initial = min(n, growSamples)
	}
	data := make([]float32, initial)
	sc := scaling{}
	sc.slope, sc.inter, sc.on = h.Scaling()
	buf := make([]byte, min(need, chunkBytes))
	var pos, read int64 // samples converted, bytes read
	for pos < n {
		want := min(int64(len(buf)), (n-pos)*sz)
		got, err := s.readFull(buf[:want])
		if err != nil {
			return nil, err
		}
		read += int64(got)
		k := int64(got) / sz
		if pos+k > int64(len(data)) {
			grown := make([]float32, min(max(2*int64(len(data)), pos+k), n))
			copy(grown, data[:pos])
			data = grown
		}
		convert(data[pos:pos+k], buf[:k*sz], dt, h.ByteOrder, sc)
		pos += k
		if int64(got) < want {
			where := "the stream ends"
			switch {
			case s.gz != nil:
				where = "the decompressed stream ends"
			case s.size >= 0:
				where = "the file ends"
			}
			return nil, formatErr(s.name, fmt.Sprintf("header declares %d bytes of samples but %s after %d", need, where, read), io.ErrUnexpectedEOF)
		}
	}
	return &volume.Image{
		Dims:   h.Dims(),
		Data:   data,
		Affine: h.Affine(),
		Source: volume.Source{
			Path:          s.name,
			Format:        "nifti",
			Description:   h.Descrip,
			FieldStrength: math.NaN(),
		},
	}, nil
}

// scaling is y = slope·x + inter, applied when on.
type scaling struct {
	slope, inter float64
	on           bool
}

func (sc scaling) apply(v float64) float32 {
	if sc.on {
		v = sc.slope*v + sc.inter
	}
	return float32(v)
}

// convert decodes len(dst) samples of type dt from src.
func convert(dst []float32, src []byte, dt Datatype, o binary.ByteOrder, sc scaling) {
	// The loops below decode little-endian bytes through the concrete
	// binary.LittleEndian, which the compiler inlines to plain loads (a
	// call through the ByteOrder interface per sample cost more than the
	// inflate of a .nii.gz). Big-endian samples are swapped in place first:
	// src is always the caller's scratch buffer.
	if sz := dt.Size(); o == binary.BigEndian && sz > 1 {
		swapBytes(src[:len(dst)*sz], sz)
	}
	le := binary.LittleEndian
	switch dt {
	case Uint8:
		for i := range dst {
			dst[i] = sc.apply(float64(src[i]))
		}
	case Int8:
		for i := range dst {
			dst[i] = sc.apply(float64(int8(src[i])))
		}
	case Int16:
		for i := range dst {
			dst[i] = sc.apply(float64(int16(le.Uint16(src[2*i:]))))
		}
	case Uint16:
		for i := range dst {
			dst[i] = sc.apply(float64(le.Uint16(src[2*i:])))
		}
	case Int32:
		for i := range dst {
			dst[i] = sc.apply(float64(int32(le.Uint32(src[4*i:]))))
		}
	case Uint32:
		for i := range dst {
			dst[i] = sc.apply(float64(le.Uint32(src[4*i:])))
		}
	case Int64:
		for i := range dst {
			dst[i] = sc.apply(float64(int64(le.Uint64(src[8*i:]))))
		}
	case Uint64:
		for i := range dst {
			dst[i] = sc.apply(float64(le.Uint64(src[8*i:])))
		}
	case Float32:
		if nativeLE && (!sc.on || sc.slope == 1 && sc.inter == 0) {
			// The samples, little-endian by now, are the bytes of dst as it
			// lies in memory: one copy, bit for bit (NaN payloads too). The
			// identity scaling (slope 1, intercept 0, which nibabel writes
			// for float data) is taken as none: the value of every sample is
			// the same, and a stored −0 stays −0 instead of becoming +0.
			copy(float32Bytes(dst), src[:4*len(dst)])
			return
		}
		if !sc.on {
			for i := range dst {
				dst[i] = math.Float32frombits(le.Uint32(src[4*i:]))
			}
			return
		}
		for i := range dst {
			dst[i] = sc.apply(float64(math.Float32frombits(le.Uint32(src[4*i:]))))
		}
	case Float64:
		for i := range dst {
			dst[i] = sc.apply(math.Float64frombits(le.Uint64(src[8*i:])))
		}
	default:
		panic("nifti: convert called with " + dt.String())
	}
}

// swapBytes reverses the byte order of each sz-byte element of b.
func swapBytes(b []byte, sz int) {
	switch sz {
	case 2:
		for i := 0; i+1 < len(b); i += 2 {
			b[i], b[i+1] = b[i+1], b[i]
		}
	case 4:
		for i := 0; i+3 < len(b); i += 4 {
			binary.LittleEndian.PutUint32(b[i:], binary.BigEndian.Uint32(b[i:]))
		}
	case 8:
		for i := 0; i+7 < len(b); i += 8 {
			binary.LittleEndian.PutUint64(b[i:], binary.BigEndian.Uint64(b[i:]))
		}
	}
}

// crcReader passes reads through, adding them to a CRC-32 (IEEE, as in
// the gzip trailer, RFC 1952) while on.
type crcReader struct {
	r   io.Reader
	sum uint32
	on  bool
}

func (c *crcReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	if c.on {
		c.sum = crc32.Update(c.sum, crc32.IEEETable, p[:n])
	}
	return n, err
}
