package nifti

import "strconv"

// Datatype is a NIfTI datatype code (nifti1.h NIFTI_TYPE_*; the same codes
// in NIfTI-2).
type Datatype int16

// Datatype codes from nifti1.h. The reader converts every real type to
// float32; complex, RGB, binary and 128-bit types are recognised but not
// read.
const (
	Binary     Datatype = 1
	Uint8      Datatype = 2
	Int16      Datatype = 4
	Int32      Datatype = 8
	Float32    Datatype = 16
	Complex64  Datatype = 32
	Float64    Datatype = 64
	RGB24      Datatype = 128
	Int8       Datatype = 256
	Uint16     Datatype = 512
	Uint32     Datatype = 768
	Int64      Datatype = 1024
	Uint64     Datatype = 1280
	Float128   Datatype = 1536
	Complex128 Datatype = 1792
	Complex256 Datatype = 2048
	RGBA32     Datatype = 2304
)

var datatypeNames = map[Datatype]string{
	Binary: "binary", Uint8: "uint8", Int16: "int16", Int32: "int32",
	Float32: "float32", Complex64: "complex64", Float64: "float64",
	RGB24: "rgb24", Int8: "int8", Uint16: "uint16", Uint32: "uint32",
	Int64: "int64", Uint64: "uint64", Float128: "float128",
	Complex128: "complex128", Complex256: "complex256", RGBA32: "rgba32",
}

// String returns the lower-case name of the type ("int16"), or
// "datatype N" for a code nifti1.h does not define.
func (d Datatype) String() string {
	if s, ok := datatypeNames[d]; ok {
		return s
	}
	return "datatype " + strconv.Itoa(int(d))
}

// Size returns the bytes per sample of a type this package reads or
// writes, and 0 for any other code.
func (d Datatype) Size() int {
	switch d {
	case Uint8, Int8:
		return 1
	case Int16, Uint16:
		return 2
	case Int32, Uint32, Float32:
		return 4
	case Int64, Uint64, Float64:
		return 8
	}
	return 0
}

// known reports whether nifti1.h defines the code.
func (d Datatype) known() bool {
	_, ok := datatypeNames[d]
	return ok
}

// writable reports whether Write can store samples of this type.
func (d Datatype) writable() bool { return d.Size() > 0 }
