//go:build !unix

package regular

import "os"

const nonBlock = 0

func clearNonBlock(*os.File) error { return nil }
