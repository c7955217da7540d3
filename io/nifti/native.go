package nifti

import (
	"encoding/binary"
	"unsafe"
)

// nativeLE reports whether this machine stores numbers little-endian,
// the byte order of the samples tauvox writes and of most NIfTI files.
var nativeLE = binary.NativeEndian.Uint16([]byte{1, 0}) == 1

// float32Bytes returns the memory of s as bytes (4 per sample, in the
// machine's byte order), without copying. On a little-endian machine
// these are the bytes writeSamples would encode one sample at a time
// (math.Float32bits, little-endian: bit for bit, NaN payloads included),
// so float32 samples are handed to the writer as they lie in memory.
func float32Bytes(s []float32) []byte {
	if len(s) == 0 {
		return nil
	}
	return unsafe.Slice((*byte)(unsafe.Pointer(&s[0])), 4*len(s))
}
