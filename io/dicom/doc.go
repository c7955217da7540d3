// Package dicom finds MR series in DICOM folders, reads them as
// *volume.Image, and writes synthetic series for the simulator.
//
// # Discovery and grouping
//
// Scan walks files and folders recursively and recognises DICOM by
// content, not by name: the Part-10 preamble with "DICM" at byte 128
// (PS3.10 §7.1), or a bare data set that starts with a group 0008 element.
// Other files are counted as Skipped. Only the header is read: the bytes up
// to the pixel data element (7FE0,0010/0008/0009), read in growing chunks
// (inflated chunk by chunk for the deflated transfer syntax), so a large
// export scans fast and the memory held is that of the headers, not the
// pixels. Headers are read on every CPU (runtime.GOMAXPROCS goroutines)
// and gathered in file order, so the catalog does not depend on their
// number. Empty, truncated and malformed files become Problems with the
// path and reason, and the scan goes on.
//
// Images are grouped by SeriesInstanceUID, and a series that mixes
// orientations (ImageOrientationPatient to 1e-4), matrix sizes (Rows,
// Columns) or image types (ImageType; FrameType and ComplexImageComponent
// for enhanced frames, e.g. magnitude and phase) is split; mixed matrix
// sizes are also reported as a Problem naming the odd files. Localizers
// (ImageType containing LOCALIZER), DERIVED images and DICOM objects
// without pixel data are left out unless ScanOptions asks for them.
//
// Each Series says which acquisition parameter varies — InversionTime,
// FlipAngle, EchoTime, RepetitionTime (volume.Varying: first match in that
// order), or EchoNumber when only the echo numbers differ — its distinct
// values, and for echo trains the echo kind: "SE" or "GR" (multi-echo spin
// or gradient echo, told apart by ScanningSequence SE/GR,
// EchoPulseSequence, or vendor sequence-name fragments), "" when the
// headers do not tell. The package knows no fit models: tauvox scan asks
// the model registry (fit.Suggest) for the suggestion. IDs
// are short and stable: the series number and six hex digits of a hash of
// the UID (and split key), e.g. "7-3fa2c1".
//
// # Geometry and layout
//
// Slices are ordered by their position along the slice normal
// n = X × Y of ImageOrientationPatient (never by file name or
// InstanceNumber), volumes by the varying parameter ascending. Every
// slice must have exactly one image per volume; positions within 0.01 mm
// are one slice; the slices must lie on an even step, within the larger of
// 0.01 mm and 1 % of the step (the error gives the worst deviation). When
// ImagePositionPatient is written with fewer decimals both tolerances grow
// to 2·√3 × half the last decimal place (0.17 mm for 0.1 mm); a gap of
// more than 1.5 steps is named as a missing slice. An image present twice
// (same SOP Instance UID and decoded samples) is used once, with a note;
// the same UID with other samples is refused. Mosaics are refused.
//
// Protocols (protocol.go) are several series on one grid that differ in
// one acquisition parameter (one series per TI, flip angle, TE or TR):
// Catalog.Protocols, Catalog.Join and LoadProtocol.
// The affine follows PS3.3 Eq. C.7.6.2.1-1 with i = column, j = row
// (Δi = PixelSpacing[1], Δj = PixelSpacing[0]), the slice step
// d = (IPP_last − IPP_first)/(N − 1), then diag(−1, −1, 1, 1) from LPS to
// RAS (check-values §3.4); a single slice uses SpacingBetweenSlices, else
// SliceThickness, along n. The image has i (columns) fastest, then j
// (rows), k (slices) and t (volumes), as volume.Image requires. Scan does
// all of this from the headers, so an incomplete series is reported by
// Scan (Series.Problem, Catalog.Problems) and refused by Load with a
// *SeriesError naming the series, the slice (index and position) and the
// missing parameter value.
//
// # Pixel data
//
// LoadSeries reads only the files of one series; OpenSeries and
// OpenProtocol give a Reader that reads a series or protocol whole (Load)
// or a range of slices of chosen volumes at a time (ReadSlab, for fitting
// within a memory budget). Files are read on several goroutines
// (Reader.Workers), each file with one positioned read of the frames a
// slab needs, the samples converted straight into the destination; each
// image is converted by itself, so the samples are the same for any
// number of goroutines and any slab. Samples are converted to
// float32 as RescaleSlope·stored + RescaleIntercept per file, or per frame
// from the Pixel Value Transformation macro of enhanced files; 8, 16 and
// 32-bit integers (signed or not, with BitsStored < BitsAllocated masked
// or sign-extended), Float and Double Float Pixel Data are read, in
// implicit and explicit VR little endian, deflated explicit VR little
// endian and explicit VR big endian. Compressed pixel data: RLE Lossless
// (PS3.5 Annex G) and JPEG Lossless process 14 (ITU-T T.81 Annex H) are
// decoded by this package (rle.go, ljpeg.go); JPEG-LS and JPEG 2000 by
// Debian's dcmtk or GDCM, run into a temporary file, when installed;
// baseline JPEG by image/jpeg (encaps.go). Any other syntax, or a missing
// tool, gives an *UnsupportedError naming the syntax (and the Debian
// package). Image.Source.Pixels records how the pixels were decoded;
// lossy syntaxes add a warning.
//
// Enhanced MR (1.2.840.10008.5.1.4.1.1.4.1) and Legacy Converted Enhanced
// MR files are read frame by frame from the per-frame functional groups,
// then the shared group, then the top level: MR Echo (EffectiveEchoTime),
// MR Modifier (InversionTimes), MR Timing and Related Parameters
// (RepetitionTime, FlipAngle), Plane Position, Plane Orientation, Pixel
// Measures, Pixel Value Transformation and MR Image Frame Type. Frames may
// come in any order.
//
// # Identity and privacy
//
// Series and the image's volume.Source carry SeriesInstanceUID,
// StudyInstanceUID, SeriesNumber, SeriesDescription, the scanner
// (StationName, else Manufacturer and ManufacturerModelName), the field
// strength and the acquisition time (AcquisitionDateTime, else
// acquisition, series, content or study date and time) in RFC 3339 form
// (with the UTC offset when the file gives one). Patient identifiers
// (name, ID, birth date, accession number) never leave the package unless
// ScanOptions.KeepIdentifiers is set. SafeName makes any string from a file
// fit to be part of a file name.
//
// # Writing
//
// WriteSeries writes an image as classic MR Image Storage files (one per
// slice and volume, random-looking names) or, with WriteOptions.Enhanced,
// as one Enhanced MR Image Storage file, in explicit VR little endian with
// 16-bit samples and per-image RescaleSlope, the geometry from the affine
// (RAS → LPS) and new 2.25 UUID-derived UIDs (PS3.5 §B.2). The encoder is
// this package's own (encode.go): explicit VR little endian is a few
// dozen lines, and owning it keeps DS values within 16 characters and the
// written slope equal to the one used for quantising.
//
// # Reading library and robustness
//
// Element values are parsed by github.com/suyashkumar/dicom (v1.1.0), with
// SkipPixelData. That library allocates a buffer of the declared length
// of an element before it reads it, and can panic on some malformed
// sequences, so every header first passes this package's own walk of the
// element structure (walk.go): each length must fit in its item, its
// sequence and the file; sequences may hold only items; nesting is at most
// 16 deep. Only bytes that passed the walk, cut before the pixel data, are
// handed to the library, under recover. Pixel data are read by this
// package directly from the file at the offset the walk found (the
// library's native-frame reader decodes one sample per call).
//
// # Errors
//
// Errors from content are *FormatError (malformed), *UnsupportedError
// (valid DICOM that tauvox does not read) or *SeriesError (files that do
// not stack into one grid; wraps ErrIncomplete). Every error text is one
// line that starts with the file or series folder: "scans/3/IM0012: dicom:
// truncated: pixel data at byte 1174 declares 40 bytes but the file ends
// at byte 1201: unexpected EOF". No input makes the package panic.
package dicom
