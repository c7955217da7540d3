//go:build 386 || amd64 || arm || arm64 || loong64 || mips64le || mipsle || ppc64le || riscv64 || wasm

package gzsplit

import "unsafe"

// load64 returns the little-endian word at data[pos:pos+8], which the
// caller has checked lies inside data: one load, without the two bounds
// checks of binary.LittleEndian.Uint64(data[pos:]) (on the decoder's
// refill, 5 % of its time).
func load64(data []byte, pos int) uint64 {
	return *(*uint64)(unsafe.Add(unsafe.Pointer(unsafe.SliceData(data)), pos))
}
