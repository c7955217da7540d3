// Package nifti reads and writes NIfTI-1 and NIfTI-2 images (nifti1.h,
// NIfTI Data Format Working Group 2003; NIfTI-2 notice, NITRC 2011) as
// *volume.Image.
//
// # Reading
//
// Read accepts single files (.nii) and .hdr/.img pairs, each plain or
// gzip-compressed; compression is recognised by the gzip magic bytes, not
// the name. Both byte orders are read. Samples of every real type (uint8,
// int8, int16, uint16, int32, uint32, int64, uint64, float32, float64) are
// converted to float32 in NIfTI order with scl_slope/scl_inter applied
// (computed in float64; a slope of 0, NaN or Inf means no scaling). The
// image keeps dim[1..4]; a file with dim[5..7] > 1 is unsupported. The
// affine is the sform when sform_code > 0, else the qform (quaternion,
// nifti1.h method 2, qfac from pixdim[0]) when qform_code > 0, else
// diag(pixdim[1..3]) (method 1), converted from the file's spatial unit to
// millimetres. ReadHeader returns the Header without the samples, and
// Decode reads from any io.Reader.
//
// The reader checks the header before allocating: dim[0] in 1..7, every
// used dimension at least 1, no overflow of the sample count, a known and
// supported datatype, vox_offset past the header, and (for an uncompressed
// file) a file long enough for the samples declared. A compressed stream is
// read for at most the declared bytes (plus a few KiB to verify the gzip
// checksum), the sample buffer grows only as data arrive, and a short
// stream is an error wrapping io.ErrUnexpectedEOF. Reader.MaxBytes caps
// the memory of one image (DefaultMaxBytes, 2 GiB).
//
// # Writing
//
// Write stores NIfTI-1 (or NIfTI-2 via WriteOptions.Version), plain or
// gzip-compressed by the file name, float32 by default or any other real
// type for label and status maps. qform and sform are both set (code 1,
// scanner) from the affine: the sform exactly, the qform as the nearest
// rigid transform (polar decomposition) with voxel sizes and qfac = -1 for
// a left-handed affine. Files appear atomically (temporary file in the
// target folder, fsync, rename).
//
// # Errors
//
// Errors from bad content are *FormatError (malformed) or
// *UnsupportedError (valid NIfTI that tauvox does not read); both unwrap
// to their cause. Every error text is one line that starts with the file
// name: "scan.nii.gz: nifti: header declares 4194304 bytes of samples but
// the decompressed stream ends after 1024: unexpected EOF". No input makes
// the package panic.
package nifti
