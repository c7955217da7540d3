package dicom

import (
	"errors"
	"strings"

	"github.com/tauvox/tauvox/internal/output"
)

// ErrTooLarge is wrapped by the UnsupportedError returned when a header or
// a series would need more memory than the limits of ScanOptions allow.
var ErrTooLarge = errors.New("dicom: larger than the memory limit")

// ErrIncomplete is wrapped by the SeriesError returned when a series lacks
// an image for some slice and volume, holds two images for one, or has
// uneven slice spacing, so that it cannot be stacked into a grid.
var ErrIncomplete = errors.New("dicom: series cannot be stacked")

// FormatError reports a malformed file: bytes that break the DICOM
// encoding rules (PS3.5, PS3.10) or attributes with impossible values:
// a truncated element, a length beyond the end of the file, a missing
// required attribute, pixel data shorter than the header declares.
type FormatError struct {
	Path   string // file name as given by the caller
	Reason string // one line, without the path
	Err    error  // underlying cause, or nil
}

func (e *FormatError) Error() string { return message(e.Path, e.Reason, e.Err) }

// Unwrap returns the underlying cause, or nil.
func (e *FormatError) Unwrap() error { return e.Err }

// UnsupportedError reports a well-formed file that uses a feature tauvox
// does not read: a compressed transfer syntax (JPEG, JPEG-LS, JPEG 2000,
// RLE, ...), colour samples, more bits per sample than 32, a size beyond
// the memory limit.
type UnsupportedError struct {
	Path   string // file name as given by the caller
	Reason string // one line, without the path
	Err    error  // underlying cause, or nil
}

func (e *UnsupportedError) Error() string { return message(e.Path, e.Reason, e.Err) }

// Unwrap returns the underlying cause, or nil.
func (e *UnsupportedError) Unwrap() error { return e.Err }

// SeriesError reports a series whose files are each readable but do not
// make one image together: a missing or duplicated slice or echo, uneven
// slice spacing, disagreeing pixel spacing. Path is the folder of the
// series (or the file involved, when there is one); Series is the series
// ID of the Catalog.
type SeriesError struct {
	Path   string // folder or file
	Series string // series ID
	Reason string // one line
	Err    error  // ErrIncomplete or another cause
}

func (e *SeriesError) Error() string {
	return message(e.Path, "series "+e.Series+": "+e.Reason, e.Err)
}

// Unwrap returns the underlying cause.
func (e *SeriesError) Unwrap() error { return e.Err }

// fileError reports a failure of the file system (open, read, write)
// rather than of the content; it unwraps to the cause so that
// errors.Is(err, fs.ErrNotExist) works.
type fileError struct {
	path string
	op   string
	err  error
}

func (e *fileError) Error() string {
	cause := errors.Unwrap(e.err) // drop the *os.PathError's copy of the path
	if cause == nil {
		cause = e.err
	}
	return message(e.path, e.op, cause)
}

func (e *fileError) Unwrap() error { return e.err }

// message builds "path: dicom: reason: cause" on one line.
func message(path, reason string, err error) string {
	var b strings.Builder
	b.WriteString(output.Line(path))
	b.WriteString(": dicom: ")
	b.WriteString(output.Line(reason))
	if err != nil && err != ErrIncomplete {
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
