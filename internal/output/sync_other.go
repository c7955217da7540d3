//go:build !linux

package output

import "os"

func startSync(*os.File) {}
