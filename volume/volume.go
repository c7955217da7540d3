package volume

import (
	"errors"
	"fmt"
	"math"
)

// Acquisition holds the sequence parameters of one volume of a series.
// Times are in milliseconds, the flip angle in degrees. Unknown values are
// NaN; use Unknown to get an Acquisition with every field unknown.
type Acquisition struct {
	EchoTime       float64 // TE, ms
	InversionTime  float64 // TI, ms
	RepetitionTime float64 // TR, ms
	FlipAngle      float64 // nominal excitation flip angle, degrees
}

// Unknown returns an Acquisition whose fields are all NaN.
func Unknown() Acquisition {
	n := math.NaN()
	return Acquisition{EchoTime: n, InversionTime: n, RepetitionTime: n, FlipAngle: n}
}

// Source describes where an image came from. All fields are optional.
type Source struct {
	Path          string  // file or folder read
	Format        string  // "nifti", "dicom", "synthetic", ...
	Description   string  // series description or file name
	FieldStrength float64 // main field in tesla; NaN or 0 when unknown
	Scanner       string  // station / scanner name, when known
	AcquiredAt    string  // acquisition date-time, RFC 3339 when known
	// Pixels says how the samples were stored and decoded (a DICOM
	// transfer syntax and its decoder; rescaling), "" when plain.
	Pixels string
	// Warnings are remarks on the samples' fitness for quantitative use
	// (lossy compression, differing vendor scaling).
	Warnings []string
	// Patient holds the patient identifiers of the source. It is nil
	// unless the user asked for them to be kept (--keep-identifiers);
	// every writer leaves them out when it is nil.
	Patient *Patient
}

// Input names one file read to make an image (a series, its sidecar, a
// mask), for provenance records.
type Input struct {
	Path string
	Role string // "series", "sidecar", "mask", "b1"
}

// Patient holds the patient identifiers of a DICOM source.
type Patient struct {
	Name      string `json:"name,omitempty"`
	ID        string `json:"id,omitempty"`
	BirthDate string `json:"birth_date,omitempty"`
	Accession string `json:"accession_number,omitempty"`
}

// Image is a 3-D or 4-D grid of float32 samples with its geometry and
// acquisition parameters. The zero value is an empty image.
type Image struct {
	// Dims holds the grid size: Nx, Ny, Nz and the number of volumes Nt
	// (1 for a single 3-D volume). Every entry is at least 1 in a valid image.
	Dims [4]int
	// Data holds Dims[0]*Dims[1]*Dims[2]*Dims[3] samples in NIfTI order
	// (i fastest, t slowest).
	Data []float32
	// Affine maps voxel indices (i, j, k) at voxel centres to RAS
	// millimetres.
	Affine Affine
	// Acq holds one entry per volume; it may be nil for maps.
	Acq []Acquisition
	// Source describes the origin of the data.
	Source Source
}

// ErrShape reports an image whose dimensions and data do not agree.
var ErrShape = errors.New("volume: dimensions do not match the data")

// New allocates an image of the given size with an identity affine and
// zeroed samples. It panics if a dimension is below 1 or the sample count
// overflows int.
func New(nx, ny, nz, nt int) *Image {
	n, err := Count([4]int{nx, ny, nz, nt})
	if err != nil {
		panic(err)
	}
	return &Image{
		Dims:   [4]int{nx, ny, nz, nt},
		Data:   make([]float32, n),
		Affine: Identity(),
	}
}

// Count returns the number of samples of a grid, or an error if a
// dimension is below 1 or the product overflows int.
func Count(dims [4]int) (int, error) {
	n := 1
	for _, d := range dims {
		if d < 1 {
			return 0, fmt.Errorf("volume: dimension %d is below 1", d)
		}
		if n > math.MaxInt/d {
			return 0, fmt.Errorf("volume: grid %dx%dx%dx%d overflows", dims[0], dims[1], dims[2], dims[3])
		}
		n *= d
	}
	return n, nil
}

// Voxels returns the number of voxels of one volume, Nx*Ny*Nz.
func (im *Image) Voxels() int { return im.Dims[0] * im.Dims[1] * im.Dims[2] }

// Volumes returns the number of volumes, Nt.
func (im *Image) Volumes() int { return im.Dims[3] }

// Validate checks that the dimensions, data length and acquisition list
// agree.
func (im *Image) Validate() error {
	n, err := Count(im.Dims)
	if err != nil {
		return err
	}
	if len(im.Data) != n {
		return fmt.Errorf("%w: %d samples for a %dx%dx%dx%d grid", ErrShape, len(im.Data), im.Dims[0], im.Dims[1], im.Dims[2], im.Dims[3])
	}
	if im.Acq != nil && len(im.Acq) != im.Dims[3] {
		return fmt.Errorf("%w: %d acquisition entries for %d volumes", ErrShape, len(im.Acq), im.Dims[3])
	}
	return nil
}

// Volume returns the samples of volume t, sharing storage with im.
func (im *Image) Volume(t int) []float32 {
	n := im.Voxels()
	return im.Data[t*n : (t+1)*n]
}

// Index returns the sample index of voxel (i, j, k) in volume t.
func (im *Image) Index(i, j, k, t int) int {
	return i + im.Dims[0]*(j+im.Dims[1]*(k+im.Dims[2]*t))
}

// SameGrid reports whether two images share dimensions (ignoring Nt) and,
// within tol millimetres per entry, the affine.
func SameGrid(a, b *Image, tol float64) bool {
	if a.Dims[0] != b.Dims[0] || a.Dims[1] != b.Dims[1] || a.Dims[2] != b.Dims[2] {
		return false
	}
	for r := 0; r < 3; r++ {
		for c := 0; c < 4; c++ {
			if math.Abs(a.Affine[r][c]-b.Affine[r][c]) > tol {
				return false
			}
		}
	}
	return true
}

// Values returns the values of one acquisition parameter across volumes,
// chosen by get, into dst (allocated when nil or short).
func Values(dst []float64, acq []Acquisition, get func(Acquisition) float64) []float64 {
	if cap(dst) < len(acq) {
		dst = make([]float64, len(acq))
	}
	dst = dst[:len(acq)]
	for i, a := range acq {
		dst[i] = get(a)
	}
	return dst
}
