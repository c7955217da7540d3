package nifti

import (
	"errors"
	"strings"

	"github.com/tauvox/tauvox/internal/output"
)

// ErrTooLarge is wrapped by the UnsupportedError returned when an image
// would need more memory than the reader's limit (see Reader.MaxBytes).
var ErrTooLarge = errors.New("nifti: image larger than the memory limit")

// FormatError reports a malformed file: the bytes break the NIfTI rules
// (bad header size or magic, impossible dimensions, data shorter than the
// header declares, a broken gzip stream).
type FormatError struct {
	Path   string // file name as given by the caller
	Reason string // one line, without the path
	Err    error  // underlying cause, or nil
}

func (e *FormatError) Error() string { return message(e.Path, e.Reason, e.Err) }

// Unwrap returns the underlying cause, or nil.
func (e *FormatError) Unwrap() error { return e.Err }

// UnsupportedError reports a well-formed file that uses a feature tauvox
// does not read: complex or RGB samples, more than four dimensions, a size
// above the memory limit.
type UnsupportedError struct {
	Path   string // file name as given by the caller
	Reason string // one line, without the path
	Err    error  // underlying cause, or nil
}

func (e *UnsupportedError) Error() string { return message(e.Path, e.Reason, e.Err) }

// Unwrap returns the underlying cause, or nil.
func (e *UnsupportedError) Unwrap() error { return e.Err }

// fileError reports a failure of the file system (open, read, write,
// rename) rather than of the content. Its text starts with the path; it
// unwraps to the *os.PathError or other cause so that errors.Is(err,
// fs.ErrNotExist) works.
type fileError struct {
	path string
	op   string
	err  error
}

func (e *fileError) Error() string {
	cause := errors.Unwrap(e.err) // drop the *os.PathError's own copy of the path
	if cause == nil {
		cause = e.err
	}
	return message(e.path, e.op, cause)
}

func (e *fileError) Unwrap() error { return e.err }

// message builds "path: nifti: reason: cause" on one line.
func message(path, reason string, err error) string {
	var b strings.Builder
	b.WriteString(output.Line(path))
	b.WriteString(": nifti: ")
	b.WriteString(output.Line(reason))
	if err != nil && err != ErrTooLarge { // the reason already says it
		b.WriteString(": ")
		b.WriteString(output.Line(err.Error()))
	}
	return b.String()
}

func formatErr(path, reason string, err error) error {
	return &FormatError{Path: path, Reason: reason, Err: err}
}

func unsupportedErr(path, reason string, err error) error {
	return &UnsupportedError{Path: path, Reason: reason, Err: err}
}
