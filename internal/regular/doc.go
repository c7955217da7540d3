// Package regular opens input files without ever blocking on something
// that is not a file: a named pipe (FIFO), a socket or a device found where
// an input was expected is refused with ErrNotRegular instead of waiting,
// possibly forever, for a writer that never comes.
//
// Open stats nothing first (a check followed by an open races with a file
// replaced in between): it opens without blocking (O_NONBLOCK on Unix,
// which has no effect on regular files), then checks the opened file's own
// mode, so what is checked is what is read.
package regular
