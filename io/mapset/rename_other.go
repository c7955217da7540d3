//go:build !linux

package mapset

// renameNoReplace renames from to to unless to exists (checked first:
// a small race remains on systems without an atomic form).
func renameNoReplace(from, to string) error { return checkThenRename(from, to) }
