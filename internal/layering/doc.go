// Package layering holds no code: its test enforces the import rule of
// tauvox (DEVELOPERS.md, "Import rule") by reading `go list -deps` for
// every package of the module.
package layering
