package nifti

import (
	"encoding/binary"
	"math"
	"testing"
)

// TestConvertFloat32Bits: float32 samples with no scaling, or the
// identity scaling (slope 1, intercept 0, which nibabel writes for float
// data), arrive bit for bit as stored, from little- and big-endian files
// alike: −0, a NaN with a payload, ±Inf, the smallest subnormal and the
// largest finite value included (NIfTI-1: scl_slope 0 or NaN means no
// scaling; IEEE 754 binary32). A true scaling (slope 2, intercept 1)
// still applies slope·x + intercept.
func TestConvertFloat32Bits(t *testing.T) {
	bits := []uint32{
		0x0000_0000,              // +0
		0x8000_0000,              // −0
		0x7fc0_1234,              // NaN with a payload
		0x7f80_0000, 0xff80_0000, // ±Inf
		0x0000_0001,                 // smallest subnormal
		0x7f7f_ffff,                 // largest finite
		math.Float32bits(1234.5678), // an ordinary sample
		math.Float32bits(-0.000123), // negative
	}
	for _, order := range []binary.ByteOrder{binary.LittleEndian, binary.BigEndian} {
		src := make([]byte, 4*len(bits))
		for i, b := range bits {
			order.PutUint32(src[4*i:], b)
		}
		for _, sc := range []scaling{{}, {slope: 1, inter: 0, on: true}} {
			dst := make([]float32, len(bits))
			convert(dst, append([]byte(nil), src...), Float32, order, sc)
			for i, want := range bits {
				if got := math.Float32bits(dst[i]); got != want {
					t.Errorf("%v, scaling %+v: sample %d = %#08x, want %#08x", order, sc, i, got, want)
				}
			}
		}
		dst := make([]float32, len(bits))
		convert(dst, append([]byte(nil), src...), Float32, order, scaling{slope: 2, inter: 1, on: true})
		if got, want := dst[7], float32(2*float64(float32(1234.5678))+1); got != want {
			t.Errorf("%v, slope 2 intercept 1: %v, want %v", order, got, want)
		}
	}
}
