//go:build !(386 || amd64 || arm || arm64 || loong64 || mips64le || mipsle || ppc64le || riscv64 || wasm)

package gzsplit

import "encoding/binary"

// load64 returns the little-endian word at data[pos:pos+8].
func load64(data []byte, pos int) uint64 { return binary.LittleEndian.Uint64(data[pos:]) }
