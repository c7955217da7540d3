package nifti

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"

	"github.com/klauspost/compress/gzip"
	"github.com/tauvox/tauvox/internal/mapped"
	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/io/gzsplit"
	"github.com/tauvox/tauvox/volume"
)

// streamLimit is the sample-count limit of the streaming reader: it never
// holds a whole image, so only the per-slab buffers of its caller bound
// the memory (1<<60 keeps byte counts far from int64 overflow).
const streamLimit = 1 << 60

// SlabReader reads a 3-D or 4-D NIfTI image one slab at a time, a slab
// being a range of slices (third index k) of some or all volumes, without
// holding the whole image. It reads from an uncompressed file by offset
// (one positioned read per volume and slab). A gzip-compressed image is
// read sequentially when the first request is the whole image (no extra
// file); any other request first decompresses the samples once into a
// temporary file, removed by Close. A SlabReader is not safe for
// concurrent use.
type SlabReader struct {
	// Header is the header read and checked at open.
	Header *Header

	name    string // path as given, for errors
	dims    [4]int
	n       int64 // samples
	sc      scaling
	f       *os.File // source of positioned reads, nil until known
	off     int64    // byte offset of sample 0 in f
	files   []*os.File
	tmp     string // temporary file to remove, "" when none (or already unlinked)
	spilled bool   // a temporary uncompressed copy was made
	dir     string // folder for the temporary file

	// For gzip sources before spilling: the open stream, positioned at
	// the first sample, and whether it has been consumed.
	gz       *stream
	gzFile   *os.File // the compressed file, for the split read (split.go)
	split    bool     // the last whole read used a split (for tests)
	consumed bool

	buf []byte

	// VolumeDone, when not nil, is called by ReadSlab with each listed
	// volume's part of the slab (i its place in the list, vol its samples
	// in dst) as soon as that part is complete, in order. For a gzip
	// image read whole it runs while the rest is still being inflated, so
	// work on the samples (the per-voxel peaks of the automatic
	// threshold) overlaps the decompression.
	VolumeDone func(i int, vol []float32)

	// SplitMemory, when positive, lets a whole-image read of a gzip file
	// decode the second half of the compressed data on another goroutine
	// while the first is decoded in order (split.go), using up to about
	// this many bytes more than the image. 0 decodes in order only.
	SplitMemory int64
}

// SlabOptions holds the settings of OpenSlabs. The zero value (and nil)
// puts a temporary file in os.TempDir().
type SlabOptions struct {
	// TempDir is the folder of the temporary uncompressed copy of a
	// gzip-compressed image; os.TempDir() if empty.
	TempDir string
}

// OpenSlabs opens the NIfTI image at path (.nii, .nii.gz, or either half
// of a .hdr/.img pair) for reading by slabs. It reads and checks the
// header and, for an uncompressed file, that the file holds the samples the
// header declares. Close releases the files and removes any temporary
// copy.
func OpenSlabs(path string, o *SlabOptions) (*SlabReader, error) {
	rd := &Reader{MaxBytes: streamLimit}
	hdrPath := path
	if base, gz, ok := cutSuffix(path, ".img"); ok {
		hdrPath = companion(base, ".hdr", gz)
	}
	f, s, err := openStream(hdrPath)
	if err != nil {
		return nil, err
	}
	r := &SlabReader{name: path, files: []*os.File{f}}
	if o != nil {
		r.dir = o.TempDir
	}
	h, n, err := rd.header(s, hdrPath)
	if err != nil {
		r.Close()
		return nil, err
	}
	r.Header, r.n, r.dims = h, n, h.Dims()
	r.sc.slope, r.sc.inter, r.sc.on = h.Scaling()
	src, srcFile := s, f
	if h.Pair {
		base, gz, ok := cutSuffix(hdrPath, ".hdr")
		if !ok {
			r.Close()
			return nil, formatErr(hdrPath, "header magic says the samples are in a separate .img file, but the name does not end .hdr", nil)
		}
		imgPath := companion(base, ".img", gz)
		g, d, err := openStream(imgPath)
		if err != nil {
			r.Close()
			return nil, err
		}
		r.files = append(r.files, g)
		src, srcFile = d, g
	}
	if err := src.checkLength(h, n); err != nil {
		r.Close()
		return nil, err
	}
	if src.gz == nil {
		r.f, r.off = srcFile, h.VoxOffset
		return r, nil
	}
	if err := src.skipTo(h.VoxOffset, DefaultMaxBytes); err != nil {
		r.Close()
		return nil, err
	}
	r.gz, r.gzFile = src, srcFile
	return r, nil
}

// Dims returns the grid size Nx, Ny, Nz, Nt.
func (r *SlabReader) Dims() [4]int { return r.dims }

// Affine returns the voxel-to-world affine in millimetres (Header.Affine).
func (r *SlabReader) Affine() volume.Affine { return r.Header.Affine() }

// Source returns the description of the image as Read would give it.
func (r *SlabReader) Source() volume.Source {
	return volume.Source{Path: r.name, Format: "nifti", Description: r.Header.Descrip, FieldStrength: math.NaN()}
}

// Spilled reports whether a temporary uncompressed copy was made.
func (r *SlabReader) Spilled() bool { return r.spilled }

// ReadSlab fills dst with slices z0…z1−1 of the volumes listed in vols
// (nil: every volume in order), volume after volume:
//
//	dst[i*S + s], S = Nx·Ny·(z1−z0), s the voxel index inside the slab,
//
// for the i-th listed volume, converted to float32 with the scaling
// applied, as Read does. It panics if dst is shorter than that or the
// ranges are out of the image; a short or corrupt file gives an error.
func (r *SlabReader) ReadSlab(dst []float32, z0, z1 int, vols []int) error {
	nx, ny, nz, nt := r.dims[0], r.dims[1], r.dims[2], r.dims[3]
	if z0 < 0 || z1 > nz || z0 >= z1 {
		panic(fmt.Sprintf("nifti: slab %d…%d outside %d slices", z0, z1, nz))
	}
	all := vols == nil
	if all {
		vols = make([]int, nt)
		for t := range vols {
			vols[t] = t
		}
	}
	per := nx * ny * (z1 - z0)
	if len(dst) < per*len(vols) {
		panic("nifti: slab destination too short")
	}
	for _, t := range vols {
		if t < 0 || t >= nt {
			panic(fmt.Sprintf("nifti: volume %d outside %d", t, nt))
		}
	}
	if r.f == nil {
		whole := z0 == 0 && z1 == nz
		for i, t := range vols {
			whole = whole && t == i
		}
		if whole && !r.consumed {
			return r.sequential(dst, per, len(vols))
		}
		if err := r.spill(); err != nil {
			return err
		}
	}
	dt := r.Header.Datatype
	sz := int64(dt.Size())
	nv := int64(nx * ny * nz)
	if cap(r.buf) < chunkBytes {
		r.buf = make([]byte, chunkBytes)
	}
	for i, t := range vols {
		start := r.off + (int64(t)*nv+int64(z0)*int64(nx*ny))*sz
		out := dst[i*per : (i+1)*per]
		for pos := 0; pos < per; {
			k := min(per-pos, chunkBytes/int(sz))
			b := r.buf[:int64(k)*sz]
			got, err := r.f.ReadAt(b, start+int64(pos)*sz)
			if got < len(b) {
				if err == nil || err == io.EOF {
					return formatErr(r.name, fmt.Sprintf("file ends inside the samples (volume %d, slice %d)", t+1, z0+1), io.ErrUnexpectedEOF)
				}
				return &fileError{r.name, "cannot read", err}
			}
			convert(out[pos:pos+k], b, dt, r.Header.ByteOrder, r.sc)
			pos += k
		}
		if r.VolumeDone != nil {
			r.VolumeDone(i, out)
		}
	}
	return nil
}

// sequential reads the whole image from the gzip stream into dst.
func (r *SlabReader) sequential(dst []float32, per, nvol int) error {
	r.consumed = true
	s := r.gz
	dt := r.Header.Datatype
	sz := int64(dt.Size())
	need := r.n * sz
	base := s.pos // stream offset of the first sample byte
	end := base + need
	short := func(read int64) error {
		return formatErr(r.name, fmt.Sprintf("header declares %d bytes of samples but the decompressed stream ends after %d", need, read), io.ErrUnexpectedEOF)
	}
	sp := r.startSplit(base, need, dst)
	defer sp.close()
	// src reads the samples in order: with a split, from gzsplit.Head on
	// the file in memory (the same decoder as the end's), else from the
	// stream.
	src := &ordered{s: s}
	if sp != nil {
		s.crc.on = false // the consumer below adds the samples to the CRC
		src.head = gzsplit.NewHead(sp.all, sp.dstart)
		src.sp, src.all, src.mapped = sp, sp.all, sp.isMapped
		if err := src.skip(base); err != nil {
			return err
		}
	}
	// One goroutine inflates into a ring of buffers while this one
	// converts them (and runs VolumeDone): the decompression, inherently
	// sequential, is the only work left on its path. With a split it stops
	// where the speculatively decoded end begins.
	const ring = 4
	type part struct {
		b   []byte
		err error
	}
	free := make(chan []byte, ring)
	full := make(chan part, ring)
	stop := make(chan struct{})
	for range ring {
		free <- make([]byte, seqChunkBytes)
	}
	done := make(chan struct{})
	go func() {
		defer close(done)
		defer close(full)
		defer sp.stopped() // an end not confirmed at the stop is not used
		for pos := base; ; {
			n := min(int64(seqChunkBytes), sp.limitFor(end)-pos)
			if n <= 0 {
				src.atLimit(pos)
				return
			}
			var b []byte
			select {
			case b = <-free:
			case <-stop:
				return
			}
			got, err := src.readFull(b[:n])
			if err == nil && int64(got) < n && pos+int64(got) != sp.limitFor(end) {
				err = short(pos + int64(got) - base)
			}
			select {
			case full <- part{b[:got], err}:
			case <-stop:
				return
			}
			if err != nil {
				return
			}
			pos += int64(got)
		}
	}()
	// On return the producer is stopped and waited for, so that nothing
	// touches the stream after this call.
	defer func() {
		close(stop)
		<-done
	}()
	c := converter{r: r, dst: dst, per: per, nvol: nvol, sz: int(sz)}
	crc := uint32(0)
	if sp != nil {
		crc = s.crc.sum
	}
	var win []byte // the last 32 KiB read, for the split's window
	for p := range full {
		if p.err != nil {
			return p.err
		}
		if sp != nil {
			crc = crc32.Update(crc, crc32.IEEETable, p.b)
			win = keepWindow(win, p.b)
		}
		c.add(p.b)
		free <- p.b[:cap(p.b)]
	}
	accepted := sp.accepted()
	viaSplit := accepted && r.finishSplit(&c, sp, crc, win, end)
	if accepted && !viaSplit {
		// The speculative end failed its check: read it in order.
		src.sp = nil
		s.crc.on = true
		b := make([]byte, seqChunkBytes)
		for c.pos < need {
			n := min(int64(seqChunkBytes), need-c.pos)
			got, err := src.readFull(b[:n])
			if err != nil {
				return err
			}
			if int64(got) < n {
				return short(c.pos + int64(got))
			}
			crc = crc32.Update(crc, crc32.IEEETable, b[:n])
			c.add(b[:n])
		}
	}
	if c.pos < need { // the producer stopped early without an error: cannot happen
		return formatErr(r.name, "samples missing", io.ErrUnexpectedEOF)
	}
	if viaSplit {
		// The end's output (about half the image) is garbage now: collect
		// it at once, so that what the caller allocates next (the maps)
		// reuses its memory instead of adding to the peak (measured on the
		// 47 MB series of docs/benchmarks.md: 65,000 page faults and
		// 271 MB peak without, 50,000 and 211 MB with). The compressed
		// file's mapping goes on return (split.close). The stream stopped
		// at the split; the trailer was checked there.
		src.head, src.sp, src.all, sp.all = nil, nil, nil, nil
		runtime.GC()
		return nil
	}
	if src.head != nil {
		return src.finish(r.name, crc, base+need)
	}
	return s.finish()
}

// ordered is the in-order source of a sequential read: the stream, or,
// beside a split, a gzsplit.Head on the compressed file in memory. A
// gzip file of several members is read by the Head up to the end of its
// first member, and from there by the stream (which reads members one
// after another and checks each one's trailer).
type ordered struct {
	s        *stream
	head     *gzsplit.Head // nil: read s
	sp       *split        // the split beside head; nil once it is over
	all      []byte        // the compressed file head reads
	pos      int64         // bytes read from head
	mapped   bool          // all is a mapping: the part read is released as head goes
	released int           // all[:released] has been released
}

// readFull reads len(b) bytes, fewer only at the end of the data or,
// beside a split, where the accepted end begins.
func (o *ordered) readFull(b []byte) (int, error) {
	if o.head == nil {
		return o.s.readFull(b)
	}
	n := 0
	for n < len(b) {
		if o.sp != nil {
			o.sp.before(o.head)
		} else {
			o.head.SetStop(-1)
		}
		m, err := o.read(b[n:])
		n += m
		o.pos += int64(m)
		switch {
		case err == nil:
			continue
		case err == gzsplit.ErrStop:
			if o.sp.waitAt(o.pos) {
				return n, nil
			}
			continue
		case err == mapped.ErrChanged:
			return n, &fileError{o.s.name, "cannot read", err}
		case err != io.EOF:
			return n, formatErr(o.s.name, "corrupt gzip stream", err)
		case o.head.End()+8 >= len(o.all):
			return n, nil // the end of the only member
		}
		// Another member follows: the stream goes on from here (it has
		// not been read since the samples began, at o.s.pos).
		if _, err := io.CopyN(io.Discard, o.s.r, o.pos-o.s.pos); err != nil {
			return n, o.s.readErr(err)
		}
		o.s.pos = o.pos
		o.head = nil
		m, err = o.s.readFull(b[n:])
		return n + m, err
	}
	return n, nil
}

// read reads from head, the decoder of the file in memory (mapped: a
// fault there, the file changed under it, comes back as mapped.ErrChanged).
func (o *ordered) read(p []byte) (n int, err error) {
	if gerr := mapped.Guard(o.all, func() { n, err = o.head.Read(p) }); gerr != nil {
		return n, gerr
	}
	// Give back the pages head has passed, releaseBytes at a time, keeping the
	// last 64 KiB (the decoder loads a few bytes ahead and never looks
	// back in the input).
	if c := int(o.head.Consumed()) - 1<<16; o.mapped && c-o.released >= releaseBytes {
		mapped.Release(o.all, o.released, c)
		o.released = c
	}
	return n, err
}

// readerFunc is a function as an io.Reader.
type readerFunc func([]byte) (int, error)

func (f readerFunc) Read(p []byte) (int, error) { return f(p) }

// atLimit confirms an accepted end when the head, having read to pos,
// the end's start, stands exactly at its first block with nothing left
// before it; anything else aborts the end.
func (o *ordered) atLimit(pos int64) {
	if o.head == nil || o.sp == nil {
		return
	}
	sp := o.sp
	sp.mu.Lock()
	defer sp.mu.Unlock()
	sp.decide(pos == sp.limit && o.head.Drained() && o.head.BitPos() == sp.csBit)
}

// skip reads and drops n bytes from the head (the header, read from the
// stream already).
func (o *ordered) skip(n int64) error {
	if n == 0 {
		return nil
	}
	got, err := o.readFull(make([]byte, n))
	if err == nil && int64(got) < n {
		err = formatErr(o.s.name, "gzip stream ends inside the header", io.ErrUnexpectedEOF)
	}
	return err
}

// finish checks the member's trailer after a read by the head: the
// CRC-32 (crc, of the stream's first n bytes, the samples' end) and
// length of everything decoded, the bytes after the samples included
// (RFC 1952 §2.3.1). As stream.finish, bytes more than 4 KiB past the
// samples are not looked at.
func (o *ordered) finish(name string, crc uint32, n int64) error {
	if o.head == nil {
		return o.s.finish()
	}
	rest, err := io.ReadAll(io.LimitReader(readerFunc(o.read), 4096))
	if err == mapped.ErrChanged {
		return &fileError{name, "cannot read", err}
	}
	if err != nil {
		return formatErr(name, "corrupt gzip stream", err)
	}
	if len(rest) == 4096 {
		return nil
	}
	crc = crc32.Update(crc, crc32.IEEETable, rest)
	end := o.head.End()
	var t [8]byte
	var k int
	if err := mapped.Guard(o.all, func() { k = copy(t[:], o.all[end:]) }); err != nil {
		return &fileError{name, "cannot read", err}
	}
	if k < 8 {
		return formatErr(name, "gzip stream ends without its trailer", io.ErrUnexpectedEOF)
	}
	if binary.LittleEndian.Uint32(t[:]) != crc || binary.LittleEndian.Uint32(t[4:]) != uint32(n+int64(len(rest))) {
		return formatErr(name, "corrupt gzip stream", errors.New("gzip: invalid checksum"))
	}
	return nil
}

// converter turns the sample bytes of a sequential read into float32,
// in order, whatever the byte counts of the parts (a sample may straddle
// two), and reports finished volumes.
type converter struct {
	r         *SlabReader
	dst       []float32
	per, nvol int
	sz        int
	pos       int64 // sample bytes taken
	carry     [8]byte
	nc        int
	vol       int // volumes reported
}

func (c *converter) add(b []byte) {
	r := c.r
	c.pos += int64(len(b))
	at := int((c.pos - int64(len(b))) / int64(c.sz)) // sample index of the next whole sample
	if c.nc > 0 {
		k := copy(c.carry[c.nc:c.sz], b)
		c.nc += k
		b = b[k:]
		if c.nc < c.sz {
			return
		}
		convert(c.dst[at:at+1], c.carry[:c.sz], r.Header.Datatype, r.Header.ByteOrder, r.sc)
		at++
		c.nc = 0
	}
	k := len(b) / c.sz
	convert(c.dst[at:at+k], b[:k*c.sz], r.Header.Datatype, r.Header.ByteOrder, r.sc)
	c.nc = copy(c.carry[:], b[k*c.sz:])
	c.report()
}

// skip takes n sample bytes already converted in place (whole samples,
// none pending) and reports the volumes they finish.
func (c *converter) skip(n int64) {
	c.pos += n
	c.report()
}

func (c *converter) report() {
	r := c.r
	done := int(c.pos / int64(c.sz))
	for r.VolumeDone != nil && c.vol < c.nvol && done >= (c.vol+1)*c.per {
		r.VolumeDone(c.vol, c.dst[c.vol*c.per:(c.vol+1)*c.per])
		c.vol++
	}
}

// keepWindow returns the last 32 KiB of win followed by b.
func keepWindow(win, b []byte) []byte {
	const w = 1 << 15
	if len(b) >= w {
		return append(win[:0], b[len(b)-w:]...)
	}
	win = append(win, b...)
	if len(win) > w {
		win = append(win[:0], win[len(win)-w:]...)
	}
	return win
}

// releaseBytes is how much of a mapped file the ordinary decoder of a
// split read passes before it gives those pages back (a variable for the
// tests, which use small files).
var releaseBytes = 8 << 20

// seqChunkBytes is the size of the buffers of a sequential read (a
// variable for the tests of the split, which use small files).
var seqChunkBytes = 1 << 20

// spill decompresses the samples into a temporary file and reads from it
// from then on.
func (r *SlabReader) spill() error {
	if r.consumed {
		// The stream was read once already: open it afresh.
		if err := r.reopen(); err != nil {
			return err
		}
	}
	r.consumed = true
	dir := r.dir
	if dir == "" {
		dir = os.TempDir()
	}
	t, err := os.CreateTemp(dir, ".tauvox-"+sanitize(filepath.Base(r.name), 40)+".*.raw")
	if err != nil {
		return &fileError{r.name, "cannot create temporary uncompressed copy", err}
	}
	r.tmp, r.spilled = t.Name(), true
	r.files = append(r.files, t)
	// Unlinked at once where the system allows it (Unix): the open file
	// still reads and writes, and its space returns when it is closed,
	// even when the process is killed. Elsewhere Close removes it.
	if os.Remove(r.tmp) == nil {
		r.tmp = ""
	}
	need := r.n * int64(r.Header.Datatype.Size())
	bw := bufio.NewWriterSize(t, 1<<20)
	got, err := io.CopyN(bw, r.gz.r, need)
	r.gz.pos += got
	if err == io.EOF {
		return formatErr(r.name, fmt.Sprintf("header declares %d bytes of samples but the decompressed stream ends after %d", need, got), io.ErrUnexpectedEOF)
	}
	if err != nil {
		var pe *os.PathError
		if errors.As(err, &pe) {
			return &fileError{t.Name(), "cannot write temporary uncompressed copy", err}
		}
		return r.gz.readErr(err)
	}
	if err := bw.Flush(); err != nil {
		return &fileError{t.Name(), "cannot write temporary uncompressed copy", err}
	}
	if err := r.gz.finish(); err != nil {
		return err
	}
	r.f, r.off = t, 0
	return nil
}

// reopen opens the compressed source again at its first sample.
func (r *SlabReader) reopen() error {
	path := r.name
	if r.Header.Pair {
		base, gz, _ := cutSuffix(path, ".hdr")
		if b, g, ok := cutSuffix(path, ".img"); ok {
			base, gz = b, g
		}
		path = companion(base, ".img", gz)
	}
	f, s, err := openStream(path)
	if err != nil {
		return err
	}
	r.files = append(r.files, f)
	if !r.Header.Pair {
		if _, _, err := (&Reader{MaxBytes: streamLimit}).header(s, path); err != nil {
			return err
		}
	}
	if err := s.skipTo(r.Header.VoxOffset, DefaultMaxBytes); err != nil {
		return err
	}
	r.gz = s
	return nil
}

// Close closes the files and removes the temporary copy, if any.
func (r *SlabReader) Close() error {
	var first error
	for _, f := range r.files {
		if err := f.Close(); err != nil && first == nil && !errors.Is(err, os.ErrClosed) {
			first = err
		}
	}
	r.files = nil
	if r.tmp != "" {
		if err := os.Remove(r.tmp); err != nil && first == nil {
			first = err
		}
		r.tmp = ""
	}
	return first
}

// StreamWriter writes a single-file NIfTI image whose samples arrive in
// parts, in NIfTI order: the header first, then each Append, compressed
// on the fly for a .nii.gz name. The file is written under a temporary name
// in the target folder and renamed into place by Close, as Write does; an
// error or Abort removes it. A StreamWriter is not safe for concurrent use.
type StreamWriter struct {
	path      string
	f         *output.File
	bw        *bufio.Writer
	zw        io.WriteCloser
	w         io.Writer
	dt        Datatype
	want, got int64
	err       error
	done      bool
	finished  bool // every sample written, the stream ended and flushed
}

// Create starts the image at path with grid dims and the affine; opt is
// as for Write (nil: the defaults). The samples then come by Append.
func Create(path string, dims [4]int, affine volume.Affine, opt *WriteOptions) (*StreamWriter, error) {
	o := opt.withDefaults()
	n, err := volume.Count(dims)
	if err != nil {
		return nil, errors.New(message(path, "cannot write", err))
	}
	stand := &volume.Image{Dims: dims, Affine: affine}
	gz, err := checkStream(path, stand, &o)
	if err != nil {
		return nil, err
	}
	hdr := encodeHeader(stand, &o)
	f, err := output.Create(path)
	if err != nil {
		return nil, &fileError{path, "cannot create temporary file", err}
	}
	sw := &StreamWriter{path: path, f: f, dt: o.Datatype, want: int64(n)}
	sw.bw = bufio.NewWriterSize(f, 1<<20)
	sw.w = sw.bw
	if gz {
		if sw.zw, err = newCompressor(sw.bw, o.Compression); err != nil {
			sw.Abort()
			return nil, &fileError{path, "cannot write", err}
		}
		sw.w = sw.zw
	}
	if _, err := sw.w.Write(hdr); err != nil {
		sw.Abort()
		return nil, &fileError{path, "cannot write", err}
	}
	return sw, nil
}

// checkName accepts the names Write and Create write: .nii, and .nii.gz
// (gz).
func checkName(path string) (gz bool, err error) {
	lower := strings.ToLower(path)
	switch {
	case strings.HasSuffix(lower, ".nii.gz"):
		return true, nil
	case strings.HasSuffix(lower, ".nii"):
		return false, nil
	}
	return false, errors.New(message(path, "file name must end .nii or .nii.gz", nil))
}

// checkStream makes the checks of checkWrite that do not need the
// samples: the name, the datatype, the version and its dimension limit,
// the affine, the time step and the gzip level.
func checkStream(path string, im *volume.Image, o *WriteOptions) (gz bool, err error) {
	bad := func(reason string) error { return errors.New(message(path, reason, nil)) }
	if gz, err = checkName(path); err != nil {
		return false, err
	}
	if !o.Datatype.writable() {
		return false, bad(fmt.Sprintf("cannot write datatype %s", o.Datatype))
	}
	if o.Version != 1 && o.Version != 2 {
		return false, bad(fmt.Sprintf("version %d, want 1 or 2", o.Version))
	}
	if o.Version == 1 {
		for _, d := range im.Dims {
			if d > math.MaxInt16 {
				return false, bad(fmt.Sprintf("dimension %d exceeds the NIfTI-1 limit of %d; write NIfTI-2", d, math.MaxInt16))
			}
		}
	}
	if !finiteAffine(&im.Affine) {
		return false, bad("affine holds NaN or Inf")
	}
	if math.IsNaN(o.TimeStep) || math.IsInf(o.TimeStep, 0) || o.TimeStep < 0 {
		return false, bad(fmt.Sprintf("time step %g ms is not a finite non-negative number", o.TimeStep))
	}
	if (o.Compression < gzip.HuffmanOnly || o.Compression > gzip.BestCompression) && o.Compression != RunsCompression && gz {
		return false, bad(fmt.Sprintf("gzip level %d out of range", o.Compression))
	}
	return gz, nil
}

// Append writes the next samples (NIfTI order). Integer datatypes need
// whole numbers within range, as for Write.
func (w *StreamWriter) Append(samples []float32) error {
	if w.err != nil {
		return w.err
	}
	if w.done {
		return errors.New(message(w.path, "append after close", nil))
	}
	if w.got+int64(len(samples)) > w.want {
		w.err = errors.New(message(w.path, fmt.Sprintf("%d samples appended, the grid holds %d", w.got+int64(len(samples)), w.want), nil))
		w.Abort()
		return w.err
	}
	if err := writeSamples(w.w, samples, w.dt); err != nil {
		var se *sampleError
		if errors.As(err, &se) {
			se.index += int(w.got)
			w.err = errors.New(message(w.path, "cannot write", se))
		} else {
			w.err = &fileError{w.path, "cannot write", err}
		}
		w.Abort()
		return w.err
	}
	w.got += int64(len(samples))
	if w.got == w.want {
		// The last samples: end the stream now and start its write to
		// disk, so that the sync in Close, after whatever the caller does
		// in between, finds the data written.
		if err := w.finish(); err != nil {
			return err
		}
		w.f.StartSync()
	}
	return nil
}

// finish ends the compressed stream and flushes the file's buffer.
func (w *StreamWriter) finish() error {
	if w.finished {
		return nil
	}
	var err error
	if w.zw != nil {
		err = w.zw.Close()
	}
	if err == nil {
		err = w.bw.Flush()
	}
	if err != nil {
		w.err = &fileError{w.path, "cannot write", err}
		w.Abort()
		return w.err
	}
	w.finished = true
	return nil
}

// Close checks that every sample arrived, finishes the stream, syncs and
// renames the file into place.
func (w *StreamWriter) Close() error {
	if w.err != nil {
		return w.err
	}
	if w.done {
		return nil
	}
	if w.got != w.want {
		w.err = errors.New(message(w.path, fmt.Sprintf("closed after %d of %d samples", w.got, w.want), nil))
		w.Abort()
		return w.err
	}
	if err := w.finish(); err != nil {
		return err
	}
	w.done = true
	if err := w.f.Commit(); err != nil {
		w.err = &fileError{w.path, "cannot write", err}
		return w.err
	}
	return nil
}

// Abort abandons the file: the temporary file is closed and removed and
// path is left as it was. It is a no-op after Close.
func (w *StreamWriter) Abort() {
	if w.done {
		return
	}
	w.done = true
	w.f.Abort()
}
