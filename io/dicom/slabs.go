package dicom

import (
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"runtime"
	"sort"
	"sync"
	"sync/atomic"

	"github.com/tauvox/tauvox/internal/regular"
	"github.com/tauvox/tauvox/volume"
)

// Reader reads the samples of one series or protocol (a grid of slices ×
// volumes, each image a frame of some file) whole or a range of slices at
// a time. Files are read on several goroutines, each with one positioned
// read of the pixel data and the samples converted straight into the
// destination; the samples do not depend on the number of goroutines or
// on the slice ranges asked for (each image is converted by itself).
// A Reader holds no open file; it is safe for one ReadSlab at a time.
type Reader struct {
	dims   [4]int
	affine volume.Affine
	acq    []volume.Acquisition
	src    volume.Source
	cells  []*frameInfo // image of slice k of volume t at k + nz*t
	name   string       // series or protocol ID, for messages
	path   string       // series folder, for messages
	max    int64        // ScanOptions.MaxBytes

	// Workers is the number of goroutines that read files; 0 means one
	// per CPU (runtime.GOMAXPROCS).
	Workers int
}

// OpenSeries returns a Reader of the series s. It refuses what
// LoadSeries refuses, except the size limit, which applies to what is
// read at once (LoadSeries, or a ReadSlab of many slices).
func OpenSeries(s *Series) (*Reader, error) {
	if s == nil {
		panic("dicom: OpenSeries of a nil series")
	}
	if s.err != nil {
		return nil, s.err
	}
	lay := s.lay
	src := s.Source
	src.Pixels, src.Warnings = s.pixelNotes()
	return &Reader{
		dims:   [4]int{lay.nx, lay.ny, lay.nz, lay.nt},
		affine: lay.affine,
		acq:    append([]volume.Acquisition(nil), lay.acq...),
		src:    src,
		cells:  lay.cells,
		name:   "series " + s.ID,
		path:   s.Source.Path,
		max:    s.opt.maxBytes(),
	}, nil
}

// OpenProtocol returns a Reader of the protocol p: the volumes of its
// series in ascending order of the varying parameter (stable: members in
// their order), on the grid of the first series.
func OpenProtocol(p *Protocol) (*Reader, error) {
	if p.err != nil {
		return nil, p.err
	}
	first := p.members[0]
	r, err := OpenSeries(first)
	if err != nil {
		return nil, err
	}
	r.name, r.src.Description = "protocol "+p.ID, p.Description
	r.src.Pixels, r.src.Warnings = p.pixelNotes()
	nz := r.dims[2]
	type vol struct {
		s   *Series
		t   int
		acq volume.Acquisition
	}
	var vols []vol
	for _, s := range p.members {
		if s.err != nil {
			return nil, s.err
		}
		if s.lay.nx != r.dims[0] || s.lay.ny != r.dims[1] || s.lay.nz != nz {
			return nil, &SeriesError{Path: s.Source.Path, Series: p.ID, Err: ErrIncomplete,
				Reason: fmt.Sprintf("series %s has grid %v, not %v", s.ID, []int{s.lay.nx, s.lay.ny, s.lay.nz}, r.dims[:3])}
		}
		for t := 0; t < s.lay.nt; t++ {
			vols = append(vols, vol{s, t, s.lay.acq[t]})
		}
	}
	by := params[0]
	for _, pr := range params {
		if pr.name == p.Varying {
			by = pr
		}
	}
	sort.SliceStable(vols, func(a, b int) bool { return by.get(vols[a].acq) < by.get(vols[b].acq) })
	r.dims[3] = len(vols)
	r.acq = make([]volume.Acquisition, len(vols))
	r.cells = make([]*frameInfo, 0, nz*len(vols))
	for t, v := range vols {
		r.acq[t] = v.acq
		r.cells = append(r.cells, v.s.lay.cells[v.t*nz:(v.t+1)*nz]...)
	}
	return r, nil
}

// Dims returns the grid: columns, rows, slices, volumes.
func (r *Reader) Dims() [4]int { return r.dims }

// Affine returns the voxel-to-RAS affine.
func (r *Reader) Affine() volume.Affine { return r.affine }

// Acq returns a copy of the acquisition parameters of each volume.
func (r *Reader) Acq() []volume.Acquisition { return append([]volume.Acquisition(nil), r.acq...) }

// Source returns where the series comes from.
func (r *Reader) Source() volume.Source { return r.src }

// Load reads the whole series as one image, within ScanOptions.MaxBytes.
func (r *Reader) Load() (*volume.Image, error) {
	dims := r.dims
	count, err := volume.Count(dims)
	if err != nil || int64(count) > r.max/4 {
		return nil, unsupportedErr(r.path, fmt.Sprintf("%s: %d×%d×%d×%d samples exceed the memory limit of %d bytes",
			r.name, dims[0], dims[1], dims[2], dims[3], r.max), ErrTooLarge)
	}
	im := &volume.Image{Dims: dims, Data: make([]float32, count), Affine: r.affine, Source: r.src, Acq: r.Acq()}
	if err := r.ReadSlab(im.Data, 0, dims[2], nil); err != nil {
		return nil, err
	}
	return im, nil
}

// ReadSlab reads slices z0 ≤ k < z1 of the volumes vols (all volumes
// when vols is nil) into dst, which holds (z1−z0)·columns·rows samples
// per volume, volume after volume, in the layout of volume.Image. A file
// that changed since the scan, or whose pixel data are short, gives a
// *FormatError naming it; with several bad files, the first in slice
// order of the first volume is named, whatever the number of goroutines.
func (r *Reader) ReadSlab(dst []float32, z0, z1 int, vols []int) error {
	nx, ny, nz, nt := r.dims[0], r.dims[1], r.dims[2], r.dims[3]
	if z0 < 0 || z1 > nz || z0 >= z1 {
		panic(fmt.Sprintf("dicom: ReadSlab of slices [%d, %d) of %d", z0, z1, nz))
	}
	if vols == nil {
		vols = make([]int, nt)
		for t := range vols {
			vols[t] = t
		}
	}
	plane, depth := nx*ny, z1-z0
	if len(dst) != plane*depth*len(vols) {
		panic(fmt.Sprintf("dicom: ReadSlab destination of %d samples for %d", len(dst), plane*depth*len(vols)))
	}
	// One job per file, in order of its first image (volume, then slice).
	type cell struct {
		fr  *frameInfo
		off int
	}
	type job struct {
		f     *fileInfo
		cells []cell
	}
	var jobs []job
	at := map[*fileInfo]int{}
	for v, t := range vols {
		for k := z0; k < z1; k++ {
			fr := r.cells[k+nz*t]
			j, ok := at[fr.file]
			if !ok {
				j = len(jobs)
				at[fr.file] = j
				jobs = append(jobs, job{f: fr.file})
			}
			jobs[j].cells = append(jobs[j].cells, cell{fr, (v*depth + k - z0) * plane})
		}
	}
	workers := r.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	workers = max(min(workers, len(jobs)), 1)
	errs := make([]error, len(jobs))
	var next atomic.Int64
	var failed atomic.Bool
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var buf []byte
			for !failed.Load() {
				i := int(next.Add(1) - 1)
				if i >= len(jobs) {
					return
				}
				jb := &jobs[i]
				frames := make([]int, len(jb.cells))
				for c, x := range jb.cells {
					frames[c] = x.fr.index
				}
				var err error
				var frameAt func(int) []byte
				buf, frameAt, err = readFrames(jb.f, buf, frames, r.max)
				if err != nil {
					errs[i] = err
					failed.Store(true)
					return
				}
				for _, x := range jb.cells {
					decode(dst[x.off:x.off+plane], frameAt(x.fr.index), jb.f, x.fr)
				}
			}
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

// readFrames reads the frames (0-based indices) of f that a slab needs
// into buf (grown when short) and returns it with the function that gives
// the stored bytes of one of those frames. Frames of an uncompressed file
// are read with one positioned read spanning them (the whole pixel data
// of a classic file); a deflated file is inflated up to its last frame.
func readFrames(f *fileInfo, buf []byte, frames []int, maxBytes int64) ([]byte, func(int) []byte, error) {
	rf := f.raw
	path := rf.path
	bps := bytesPerSample(f)
	frameBytes := int64(f.rows) * int64(f.cols) * int64(bps)
	need := frameBytes * int64(f.nFrames)
	vl := int64(rf.pix.vl)
	if vl < need {
		return buf, nil, formatErr(path, fmt.Sprintf("pixel data has %d bytes but %d frames of %d×%d samples of %d bits need %d",
			vl, f.nFrames, f.cols, f.rows, 8*bps, need), nil)
	}
	if rf.syn.encapsulated {
		// Compressed: every frame decoded to little-endian samples.
		b, err := readCompressed(f, maxBytes)
		if err != nil {
			return buf, nil, err
		}
		return buf, func(i int) []byte { return b[int64(i)*frameBytes : int64(i+1)*frameBytes] }, nil
	}
	lo, hi := frames[0], frames[0]
	for _, i := range frames {
		lo, hi = min(lo, i), max(hi, i)
	}
	if rf.syn.deflate {
		lo = 0 // a deflate stream is read from its start
	}
	span := frameBytes * int64(hi-lo+1)
	if span > maxBytes {
		return buf, nil, unsupportedErr(path, fmt.Sprintf("pixel data of %d bytes exceed the memory limit of %d bytes", span, maxBytes), ErrTooLarge)
	}
	file, st, err := regular.OpenInfo(path)
	if err != nil {
		return buf, nil, &fileError{path, "open", err}
	}
	defer file.Close()
	if st.Size() != rf.size {
		return buf, nil, formatErr(path, fmt.Sprintf("file changed since the scan (%d bytes, was %d)", st.Size(), rf.size), nil)
	}
	if int64(cap(buf)) < span {
		buf = make([]byte, span)
	}
	buf = buf[:span]
	start := rf.pix.value + frameBytes*int64(lo)
	if rf.syn.deflate {
		var r io.Reader
		if r, err = inflatedFrom(file, rf); err == nil {
			_, err = io.ReadFull(r, buf)
		}
	} else {
		var n int
		n, err = file.ReadAt(buf, rf.dataStart+start)
		if n == len(buf) {
			err = nil
		}
	}
	if err != nil {
		if err == io.EOF {
			err = io.ErrUnexpectedEOF
		}
		return buf, nil, formatErr(path, fmt.Sprintf("truncated: pixel data declares %d bytes", vl), err)
	}
	return buf, func(i int) []byte { return buf[int64(i-lo)*frameBytes : int64(i-lo+1)*frameBytes] }, nil
}

// decodeLE16 is decode for the common case: 16-bit little-endian samples
// with every bit stored. The arithmetic is decode's, so the samples are
// the same.
func decodeLE16(dst []float32, src []byte, signed bool, slope, icpt float64) {
	src = src[:2*len(dst)]
	if signed {
		for i := range dst {
			x := float64(int16(binary.LittleEndian.Uint16(src[2*i:])))
			dst[i] = float32(slope*x + icpt)
		}
		return
	}
	if slope == 1 && icpt == 0 {
		for i := range dst {
			dst[i] = float32(binary.LittleEndian.Uint16(src[2*i:])) // exact: integers below 2^24
		}
		return
	}
	for i := range dst {
		x := float64(binary.LittleEndian.Uint16(src[2*i:]))
		dst[i] = float32(slope*x + icpt)
	}
}

// rescale returns the slope and intercept of a frame: the Real World
// Value Mapping's when present, else the rescale, the identity for
// absent values (PS3.3 C.11.1.1.2; a present invalid slope is refused by
// the header reader).
func rescale(fr *frameInfo) (float64, float64) {
	slope, icpt := fr.slope, fr.intercept
	if !math.IsNaN(fr.rwvSlope) {
		slope, icpt = fr.rwvSlope, fr.rwvIntercept // real-world values replace the rescale (PS3.3 C.7.6.16.2.11)
	}
	if math.IsNaN(slope) {
		slope = 1
	}
	if math.IsNaN(icpt) {
		icpt = 0
	}
	return slope, icpt
}
