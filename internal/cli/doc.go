// Package cli holds the command line's plumbing that is not a command:
// flag sets that print their usage on --help only and take flags before
// or after positional arguments (NewFlags, Parse), the flag value types
// the commands share (lists of numbers, sizes, vectors, repeatable and
// --force flags), and the build's version. The commands themselves, their
// flags, messages and exit codes stay in cmd/tauvox.
package cli
