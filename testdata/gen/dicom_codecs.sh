#!/bin/sh
# Compressed copies of reference DICOM files, made with Debian's dcmtk
# (3.6.7: dcmcjpeg, dcmcrle, dcmcjpls, dcmconv) and GDCM (3.0: gdcmconv),
# and the real-world MR test files that Debian's python3-pydicom (2.3.1)
# ships. Run from the repository root:
#
#   apt-get install dcmtk libgdcm-tools python3-pydicom
#   sh testdata/gen/dicom_codecs.sh
#
# It rewrites testdata/dicom/codecs/ and testdata/dicom/pydicom/.
#
# codecs/mr-<syntax>.dcm   pydicom's MR_small.dcm (64x64, signed 16-bit) in
#                          JPEG lossless process 14 with each selection
#                          value 1-7 (.57; .70 for SV1), with point
#                          transform 2 (sv1-pt2), RLE (.5, dcmtk and GDCM),
#                          JPEG-LS lossless (.80), JPEG 2000 lossless (.90),
#                          deflated (.1.99);
# codecs/mr8-sv<N>.dcm     the same image cut to 8 bits (BitsStored 8,
#                          BitsAllocated 8), JPEG lossless SV1 and SV7;
# codecs/ir-<syntax>/      the 7-series inversion recovery protocol of
#                          testdata/dicom/protocols (dicom_protocols.py) in
#                          JPEG lossless SV1, process 14 SV4, RLE, JPEG-LS
#                          lossless and JPEG 2000 lossless.
set -eu
PYD=/usr/lib/python3/dist-packages/pydicom/data/test_files
OUT=testdata/dicom/codecs
rm -rf "$OUT" testdata/dicom/pydicom
mkdir -p "$OUT" testdata/dicom/pydicom
for f in MR_small.dcm MR_small_RLE.dcm MR_small_bigendian.dcm MR_small_expb.dcm MR_small_implicit.dcm \
	MR_small_jp2klossless.dcm MR_small_jpeg_ls_lossless.dcm MR_small_padded.dcm MR_truncated.dcm \
	UN_sequence.dcm image_dfl.dcm ExplVR_BigEndNoMeta.dcm ExplVR_LitEndNoMeta.dcm no_meta.dcm \
	JPEG-lossy.dcm JPGExtended.dcm emri_small.dcm emri_small_RLE.dcm emri_small_jpeg_2k_lossless.dcm; do
	[ -f "$PYD/$f" ] && cp "$PYD/$f" testdata/dicom/pydicom/
done
src=$PYD/MR_small.dcm
dcmcjpeg +e1 "$src" "$OUT/mr-sv1.dcm"
for sv in 1 2 3 4 5 6 7; do
	dcmcjpeg +el +sv $sv "$src" "$OUT/mr-p14-sv$sv.dcm"
done
dcmcjpeg +el +sv 1 +pt 2 "$src" "$OUT/mr-sv1-pt2.dcm"
dcmcrle "$src" "$OUT/mr-rle-dcmtk.dcm"
gdcmconv --rle "$src" "$OUT/mr-rle-gdcm.dcm"
dcmcjpls "$src" "$OUT/mr-jpegls.dcm"
gdcmconv --j2k "$src" "$OUT/mr-j2k.dcm"
dcmconv +td "$src" "$OUT/mr-deflated.dcm"
# An 8-bit version (values scaled into 0..255 by pydicom, uncompressed).
/usr/bin/python3 - "$src" "$OUT/mr8.dcm" <<'PY'
import sys
import numpy as np
import pydicom
d = pydicom.dcmread(sys.argv[1])
a = d.pixel_array.astype(np.int64)
a = ((a - a.min()) * 255 // max(1, a.max() - a.min())).astype(np.uint8)
d.BitsAllocated, d.BitsStored, d.HighBit, d.PixelRepresentation = 8, 8, 7, 0
d.PixelData = a.tobytes()
d.save_as(sys.argv[2])
PY
dcmcjpeg +e1 "$OUT/mr8.dcm" "$OUT/mr8-sv1.dcm"
dcmcjpeg +el +sv 7 "$OUT/mr8.dcm" "$OUT/mr8-sv7.dcm"
# Lossy: baseline JPEG of the 8-bit copy, JPEG-LS near-lossless (NEAR 2).
dcmcjpeg +eb "$OUT/mr8.dcm" "$OUT/lossy-mr8-baseline.dcm"
dcmcjpls +en +md 2 "$OUT/mr8.dcm" "$OUT/lossy-mr8-jpegls-near2.dcm"
# A multi-frame Enhanced MR file (4 frames, testdata/gen/dicom_protocols.py)
# compressed frame by frame (one fragment per frame, Basic Offset Table).
enh=testdata/dicom/geometry/rwv-enhanced/enhanced.dcm
dcmcjpeg +e1 "$enh" "$OUT/enh-sv1.dcm"
dcmcrle "$enh" "$OUT/enh-rle.dcm"
gdcmconv --jpegls "$enh" "$OUT/enh-jpegls-gdcm.dcm"
for kind in sv1 p14-sv4 rle jpegls j2k; do
	mkdir -p "$OUT/ir-$kind"
	for f in testdata/dicom/protocols/*; do
		desc=$(dcmdump +P SeriesDescription "$f" | sed 's/.*\[\(.*\)\].*/\1/')
		case $desc in ir_ti*) ;; *) continue ;; esac
		o="$OUT/ir-$kind/$(basename "$f")"
		case $kind in
		sv1) dcmcjpeg +e1 "$f" "$o" ;;
		p14-sv4) dcmcjpeg +el +sv 4 "$f" "$o" ;;
		rle) dcmcrle "$f" "$o" ;;
		jpegls) dcmcjpls "$f" "$o" ;;
		j2k) gdcmconv --j2k "$f" "$o" ;;
		esac
	done
done
