//go:build !linux

package mapped

// Release does nothing here: the pages of a mapping go when it is
// unmapped (see release_linux.go).
func Release(mem []byte, from, to int) {}
