package mapset

import (
	"crypto/sha256"
	"encoding/hex"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
)

// TestChecksum: the SHA-256 of a file equals crypto/sha256 over the
// file's bytes (FIPS 180-4), and the size is the file's, from an empty
// file to several read buffers' worth, and files hashed from their
// mapping (2 chunks and more) with a part of a chunk at the end.
func TestChecksum(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	for _, n := range []int{0, 100, 1<<20 - 1, 1 << 20, 3<<20 + 7, 2*hashChunk - 1, 2 * hashChunk, 3*hashChunk + 13} {
		b := make([]byte, n)
		for i := range b {
			b[i] = byte(r.Uint32())
		}
		p := filepath.Join(t.TempDir(), "f.bin")
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		sum, size, err := Checksum(p)
		want := sha256.Sum256(b)
		if err != nil || sum != hex.EncodeToString(want[:]) || size != int64(n) {
			t.Errorf("%d bytes: %s, %d, %v; want %x, %d", n, sum, size, err, want, n)
		}
	}
}
