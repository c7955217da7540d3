package nifti

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"

	"github.com/tauvox/tauvox/volume"
)

// Header sizes and magic strings [check-values §3.5; nifti1.h; NIfTI-2
// notice, NITRC 2011].
const (
	sizeV1 = 348 // sizeof_hdr of NIfTI-1
	sizeV2 = 540 // sizeof_hdr of NIfTI-2
)

var (
	magicV1Single = []byte("n+1\x00")
	magicV1Pair   = []byte("ni1\x00")
	magicV2Single = []byte("n+2\x00\r\n\x1a\n")
	magicV2Pair   = []byte("ni2\x00\r\n\x1a\n")
)

// Transform codes of qform_code and sform_code (nifti1.h NIFTI_XFORM_*).
const (
	XformUnknown       = 0
	XformScanner       = 1 // scanner-based anatomical coordinates
	XformAligned       = 2 // aligned to another file or an anatomical truth
	XformTalairach     = 3
	XformMNI152        = 4
	XformTemplateOther = 5 // other template (nifti1.h 2011 addition)
)

// Unit codes of xyzt_units (nifti1.h NIFTI_UNITS_*): the spatial unit is
// xyzt_units & 0x07, the time unit xyzt_units & 0x38.
const (
	UnitUnknown = 0
	UnitMeter   = 1
	UnitMM      = 2
	UnitMicron  = 3
	UnitSec     = 8
	UnitMsec    = 16
	UnitUsec    = 24
	UnitHz      = 32
	UnitPPM     = 40
	UnitRads    = 48
)

// Header holds the fields of a NIfTI-1 or NIfTI-2 header that matter to
// tauvox, widened to int64 and float64 whatever the version. Arrays keep
// the nifti1.h indexing: Dim[0] is the number of dimensions, Dim[1..7] the
// sizes; Pixdim[0] is qfac and Pixdim[1..7] the voxel spacings. Transform
// fields hold the raw file values, in the file's spatial unit.
type Header struct {
	Version   int              // 1 or 2
	ByteOrder binary.ByteOrder // binary.LittleEndian or binary.BigEndian
	Pair      bool             // magic "ni1"/"ni2": samples live in a separate .img file

	Dim       [8]int64
	Pixdim    [8]float64
	Datatype  Datatype
	Bitpix    int   // as stored; the reader trusts Datatype
	VoxOffset int64 // byte offset of the first sample

	SclSlope float64 // scaling y = SclSlope·x + SclInter when SclSlope is finite and non-zero
	SclInter float64
	CalMin   float64 // display window, not used for reading
	CalMax   float64

	XYZTUnits     uint8 // raw xyzt_units; see SpatialUnit and TimeUnit
	Toffset       float64
	SliceDuration float64
	SliceStart    int64
	SliceEnd      int64
	SliceCode     int
	DimInfo       uint8

	IntentCode int
	IntentName string
	IntentP    [3]float64

	Descrip string
	AuxFile string

	QformCode int
	SformCode int
	Quatern   [3]float64    // quatern_b, quatern_c, quatern_d
	QOffset   [3]float64    // qoffset_x, qoffset_y, qoffset_z
	Srow      [3][4]float64 // srow_x, srow_y, srow_z
}

// Dims returns the grid size Nx, Ny, Nz, Nt: Dim[1..4], with dimensions
// beyond Dim[0] taken as 1. It is meaningful only for a header that passed
// the checks of ReadHeader.
func (h *Header) Dims() [4]int {
	d := [4]int{1, 1, 1, 1}
	for i := 1; i <= 4 && int64(i) <= h.Dim[0]; i++ {
		d[i-1] = int(h.Dim[i])
	}
	return d
}

// SpatialUnit returns the spatial unit code, xyzt_units & 0x07.
func (h *Header) SpatialUnit() int { return int(h.XYZTUnits & 0x07) }

// TimeUnit returns the temporal unit code, xyzt_units & 0x38.
func (h *Header) TimeUnit() int { return int(h.XYZTUnits & 0x38) }

// MMPerUnit returns the millimetres per spatial unit of the file: 1000 for
// metres, 0.001 for micrometres, and 1 for millimetres or an unknown unit
// (unknown is read as millimetres, common practice).
func (h *Header) MMPerUnit() float64 {
	switch h.SpatialUnit() {
	case UnitMeter:
		return 1000
	case UnitMicron:
		return 0.001
	}
	return 1
}

// MsPerUnit returns the milliseconds per time unit of the file (1000 for
// seconds, 0.001 for microseconds, 1 for milliseconds), and NaN for an
// unknown or non-time unit (Hz, ppm, rad/s).
func (h *Header) MsPerUnit() float64 {
	switch h.TimeUnit() {
	case UnitSec:
		return 1000
	case UnitMsec:
		return 1
	case UnitUsec:
		return 0.001
	}
	return math.NaN()
}

// Scaling returns the slope and intercept to apply to stored values, and
// false when the file asks for none (scl_slope 0, NaN or infinite, per
// nifti1.h). A non-finite intercept is taken as 0.
func (h *Header) Scaling() (slope, inter float64, ok bool) {
	s := h.SclSlope
	if s == 0 || math.IsNaN(s) || math.IsInf(s, 0) {
		return 1, 0, false
	}
	i := h.SclInter
	if math.IsNaN(i) || math.IsInf(i, 0) {
		i = 0
	}
	return s, i, true
}

// Qfac returns pixdim[0] as the qform handedness factor: -1 when it is
// negative, else 1 (nifti1.h: "if pixdim[0] is 0, qfac is taken as 1").
func (h *Header) Qfac() float64 {
	if h.Pixdim[0] < 0 {
		return -1
	}
	return 1
}

// spacing returns pixdim[1..3], with a value that is not positive and
// finite replaced by 1 (as nifti1_io.c does for the qform).
func (h *Header) spacing() [3]float64 {
	var s [3]float64
	for i := range s {
		p := h.Pixdim[i+1]
		if !(p > 0) || math.IsInf(p, 0) {
			p = 1
		}
		s[i] = p
	}
	return s
}

// Qform returns the qform affine (nifti1.h method 2) in the file's spatial
// unit, whatever QformCode says.
func (h *Header) Qform() volume.Affine {
	return quaternToAffine(h.Quatern, h.QOffset, h.spacing(), h.Qfac())
}

// Sform returns the sform affine (nifti1.h method 3, srow_x/y/z) in the
// file's spatial unit, whatever SformCode says.
func (h *Header) Sform() volume.Affine {
	a := volume.Identity()
	for r := 0; r < 3; r++ {
		a[r] = h.Srow[r]
	}
	return a
}

// AffineMethod returns the nifti1.h method Affine uses: 3 (sform) when
// SformCode > 0 and the sform is finite and invertible, else 2 (qform)
// when QformCode > 0 and the qform is finite, else 1 (pixdim scaling).
func (h *Header) AffineMethod() int {
	if h.SformCode > 0 {
		s := h.Sform()
		if _, ok := s.Inverse(); ok && finiteAffine(&s) {
			return 3
		}
	}
	if h.QformCode > 0 {
		q := h.Qform()
		if finiteAffine(&q) {
			return 2
		}
	}
	return 1
}

// Affine returns the voxel-to-world affine in millimetres, chosen by
// AffineMethod and scaled by MMPerUnit. Method 1 is the nifti1.h default
// x = pixdim[1]·i, y = pixdim[2]·j, z = pixdim[3]·k.
func (h *Header) Affine() volume.Affine {
	var a volume.Affine
	switch h.AffineMethod() {
	case 3:
		a = h.Sform()
	case 2:
		a = h.Qform()
	default:
		a = volume.Identity()
		s := h.spacing()
		for i := 0; i < 3; i++ {
			a[i][i] = s[i]
		}
	}
	if k := h.MMPerUnit(); k != 1 {
		for r := 0; r < 3; r++ {
			for c := 0; c < 4; c++ {
				a[r][c] *= k
			}
		}
	}
	return a
}

func finiteAffine(a *volume.Affine) bool {
	for r := 0; r < 3; r++ {
		for c := 0; c < 4; c++ {
			if math.IsNaN(a[r][c]) || math.IsInf(a[r][c], 0) {
				return false
			}
		}
	}
	return true
}

// sniff returns the version and byte order from the first four bytes
// (sizeof_hdr): 348 or 540, byte-swapped if neither [check-values §3.5].
func sniff(b []byte) (version int, order binary.ByteOrder, ok bool) {
	le := binary.LittleEndian.Uint32(b)
	be := binary.BigEndian.Uint32(b)
	switch {
	case le == sizeV1:
		return 1, binary.LittleEndian, true
	case le == sizeV2:
		return 2, binary.LittleEndian, true
	case be == sizeV1:
		return 1, binary.BigEndian, true
	case be == sizeV2:
		return 2, binary.BigEndian, true
	}
	return 0, nil, false
}

// cstring returns the bytes up to the first NUL.
func cstring(b []byte) string {
	if i := bytes.IndexByte(b, 0); i >= 0 {
		b = b[:i]
	}
	return string(b)
}

// parseHeader decodes a whole header (348 or 540 bytes, already sniffed).
// It checks the magic but not the dimensions; see check.
func parseHeader(b []byte, version int, o binary.ByteOrder) (*Header, string) {
	h := &Header{Version: version, ByteOrder: o}
	i16 := func(off int) int64 { return int64(int16(o.Uint16(b[off:]))) }
	i32 := func(off int) int64 { return int64(int32(o.Uint32(b[off:]))) }
	i64 := func(off int) int64 { return int64(o.Uint64(b[off:])) }
	f32 := func(off int) float64 { return float64(math.Float32frombits(o.Uint32(b[off:]))) }
	f64 := func(off int) float64 { return math.Float64frombits(o.Uint64(b[off:])) }
	if version == 1 {
		switch m := b[344:348]; {
		case bytes.Equal(m, magicV1Single):
		case bytes.Equal(m, magicV1Pair):
			h.Pair = true
		default:
			return nil, fmt.Sprintf("bad magic %q, want \"n+1\" or \"ni1\"", cstring(m))
		}
		h.DimInfo = b[39]
		for i := range h.Dim {
			h.Dim[i] = i16(40 + 2*i)
		}
		for i := range h.IntentP {
			h.IntentP[i] = f32(56 + 4*i)
		}
		h.IntentCode = int(i16(68))
		h.Datatype = Datatype(i16(70))
		h.Bitpix = int(i16(72))
		h.SliceStart = i16(74)
		for i := range h.Pixdim {
			h.Pixdim[i] = f32(76 + 4*i)
		}
		vo := f32(108)
		// NaN fails both comparisons; 2^40 bounds the conversion to int64.
		if !(vo >= 0 && vo <= 1<<40) || vo != math.Trunc(vo) {
			return nil, fmt.Sprintf("vox_offset %g is not a non-negative whole number", vo)
		}
		h.VoxOffset = int64(vo)
		h.SclSlope = f32(112)
		h.SclInter = f32(116)
		h.SliceEnd = i16(120)
		h.SliceCode = int(b[122])
		h.XYZTUnits = b[123]
		h.CalMax = f32(124)
		h.CalMin = f32(128)
		h.SliceDuration = f32(132)
		h.Toffset = f32(136)
		h.Descrip = cstring(b[148:228])
		h.AuxFile = cstring(b[228:252])
		h.QformCode = int(i16(252))
		h.SformCode = int(i16(254))
		for i := 0; i < 3; i++ {
			h.Quatern[i] = f32(256 + 4*i)
			h.QOffset[i] = f32(268 + 4*i)
			for c := 0; c < 4; c++ {
				h.Srow[i][c] = f32(280 + 16*i + 4*c)
			}
		}
		h.IntentName = cstring(b[328:344])
		return h, ""
	}
	switch m := b[4:12]; {
	case bytes.Equal(m, magicV2Single):
	case bytes.Equal(m, magicV2Pair):
		h.Pair = true
	default:
		return nil, fmt.Sprintf("bad magic %q, want \"n+2\\x00\\r\\n\\x1a\\n\" or \"ni2...\"", string(m))
	}
	h.Datatype = Datatype(i16(12))
	h.Bitpix = int(i16(14))
	for i := range h.Dim {
		h.Dim[i] = i64(16 + 8*i)
	}
	for i := range h.IntentP {
		h.IntentP[i] = f64(80 + 8*i)
	}
	for i := range h.Pixdim {
		h.Pixdim[i] = f64(104 + 8*i)
	}
	h.VoxOffset = i64(168)
	h.SclSlope = f64(176)
	h.SclInter = f64(184)
	h.CalMax = f64(192)
	h.CalMin = f64(200)
	h.SliceDuration = f64(208)
	h.Toffset = f64(216)
	h.SliceStart = i64(224)
	h.SliceEnd = i64(232)
	h.Descrip = cstring(b[240:320])
	h.AuxFile = cstring(b[320:344])
	h.QformCode = int(i32(344))
	h.SformCode = int(i32(348))
	for i := 0; i < 3; i++ {
		h.Quatern[i] = f64(352 + 8*i)
		h.QOffset[i] = f64(376 + 8*i)
		for c := 0; c < 4; c++ {
			h.Srow[i][c] = f64(400 + 32*i + 8*c)
		}
	}
	h.SliceCode = int(i32(496))
	h.XYZTUnits = uint8(i32(500))
	h.IntentCode = int(i32(504))
	h.IntentName = cstring(b[508:524])
	h.DimInfo = b[524]
	return h, ""
}

// headerSize returns sizeof_hdr for the version.
func (h *Header) headerSize() int64 {
	if h.Version == 2 {
		return sizeV2
	}
	return sizeV1
}

// check validates the header before anything is allocated and returns the
// number of samples. It returns a *FormatError or *UnsupportedError.
func (h *Header) check(path string, maxBytes int64) (int64, error) {
	nd := h.Dim[0]
	if nd < 1 || nd > 7 {
		return 0, formatErr(path, fmt.Sprintf("dim[0] is %d, want 1 to 7", nd), nil)
	}
	n := int64(1)
	for i := int64(1); i <= nd; i++ {
		d := h.Dim[i]
		if d < 1 {
			return 0, formatErr(path, fmt.Sprintf("dim[%d] is %d, want at least 1", i, d), nil)
		}
		if n > math.MaxInt64/d {
			return 0, formatErr(path, fmt.Sprintf("dimensions %s overflow", dimString(h)), nil)
		}
		n *= d
	}
	for i := int64(5); i <= nd; i++ {
		if h.Dim[i] > 1 {
			return 0, unsupportedErr(path, fmt.Sprintf("dim[%d] is %d: images of more than 4 dimensions are not supported", i, h.Dim[i]), nil)
		}
	}
	switch dt := h.Datatype; {
	case dt.Size() > 0:
	case dt.known():
		return 0, unsupportedErr(path, fmt.Sprintf("datatype %s (%d) is not supported; want a real-valued integer or float type", dt, int16(dt)), nil)
	default:
		return 0, formatErr(path, fmt.Sprintf("datatype %d is not a NIfTI datatype code", int16(h.Datatype)), nil)
	}
	if !h.Pair && h.VoxOffset < h.headerSize() {
		return 0, formatErr(path, fmt.Sprintf("vox_offset %d lies inside the %d-byte header", h.VoxOffset, h.headerSize()), nil)
	}
	// The samples become float32 in memory; the stored bytes are at most
	// twice that (float64), checked against the file size by the caller.
	if n > maxBytes/4 && maxBytes >= streamLimit {
		return 0, unsupportedErr(path, fmt.Sprintf("%s grid of %d samples (%s as float32) is too large to address", dimString(h), n, sizeText(n*4)), ErrTooLarge)
	}
	if n > maxBytes/4 {
		return 0, unsupportedErr(path, fmt.Sprintf("%s grid of %d samples needs %s in memory (float32), above the limit of %s", dimString(h), n, sizeText(n*4), sizeText(maxBytes)), ErrTooLarge)
	}
	if int64(int(n)) != n {
		return 0, unsupportedErr(path, fmt.Sprintf("%d samples do not fit in memory on this platform", n), ErrTooLarge)
	}
	return n, nil
}

func dimString(h *Header) string {
	nd := h.Dim[0]
	if nd < 1 || nd > 7 {
		nd = 7
	}
	s := ""
	for i := int64(1); i <= nd; i++ {
		if i > 1 {
			s += "x"
		}
		s += fmt.Sprint(h.Dim[i])
	}
	return s
}

// sizeText writes a byte count for a message: 2.0 GiB, 640 MiB, 12 KiB.
func sizeText(n int64) string {
	const unit = 1024
	if n < unit {
		return fmt.Sprintf("%d bytes", n)
	}
	v, i := float64(n), -1
	for v >= unit && i < 5 {
		v /= unit
		i++
	}
	return fmt.Sprintf("%.1f %ciB", v, "KMGTPE"[i])
}
