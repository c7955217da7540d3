//go:build !unix

package mapset

import "os"

// lockStage does nothing where file locks are not available: an abandoned
// temporary folder is then left for the user to delete.
func lockStage(tmp string) (*os.File, error) { return nil, nil }

func abandoned(tmp string) bool { return false }

func owned(dir string) bool { return false }
