package nifti

import (
	"bytes"
	"compress/gzip"
	"encoding/binary"
	"errors"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// validFile returns a correct little-endian file of a 2×2×2 float32 image
// in the given version, made by the writer.
func validFile(version int) []byte {
	im := volume.New(2, 2, 2, 1)
	for i := range im.Data {
		im.Data[i] = float32(i)
	}
	var b bytes.Buffer
	o := &WriteOptions{Datatype: Float32, Version: version}
	b.Write(encodeHeader(im, o))
	writeSamples(&b, im.Data, Float32)
	return b.Bytes()
}

func gz(b []byte) []byte {
	var z bytes.Buffer
	w := gzip.NewWriter(&z)
	w.Write(b)
	w.Close()
	return z.Bytes()
}

// edit returns a copy of the valid NIfTI-1 file changed by f.
func edit(version int, f func(b []byte)) []byte {
	b := validFile(version)
	f(b)
	return b
}

func dims1(d ...int16) func([]byte) {
	return func(b []byte) {
		for i := 0; i < 8; i++ {
			v := int16(1)
			if i < len(d) {
				v = d[i]
			}
			binary.LittleEndian.PutUint16(b[40+2*i:], uint16(v))
		}
	}
}

func set16(off int, v int16) func([]byte) {
	return func(b []byte) { binary.LittleEndian.PutUint16(b[off:], uint16(v)) }
}

func setF32(off int, v float32) func([]byte) {
	return func(b []byte) { binary.LittleEndian.PutUint32(b[off:], math.Float32bits(v)) }
}

type kind int

const (
	malformed kind = iota
	unsupported
)

// TestBrokenInputs: each broken file gives a one-line error with this exact
// text, of the right type (style.md: table of broken inputs, as in
// image/png's reader tests).
func TestBrokenInputs(t *testing.T) {
	big := edit(1, dims1(3, 128, 128, 64)) // declares 4 MiB of float32, holds 32 bytes
	crc := gz(validFile(1))
	crc[len(crc)-8] ^= 0xff // corrupt the CRC-32 of the gzip trailer
	cases := []struct {
		name string
		data []byte
		kind kind
		eof  bool // wraps io.ErrUnexpectedEOF
		want string
	}{
		{"empty.nii", nil, malformed, false, "empty file"},
		{"short.nii", validFile(1)[:100], malformed, true, "header truncated after 100 of 348 bytes: unexpected EOF"},
		{"short2.nii", validFile(2)[:500], malformed, true, "header truncated after 500 of 540 bytes: unexpected EOF"},
		{"three.nii", []byte{0x5c, 1, 0}, malformed, true, "header truncated after 3 bytes: unexpected EOF"},
		{"size.nii", edit(1, func(b []byte) { b[0] = 0x5d }), malformed, false, "sizeof_hdr is 349, want 348 (NIfTI-1) or 540 (NIfTI-2)"},
		{"magic.nii", edit(1, func(b []byte) { copy(b[344:], "abc\x00") }), malformed, false, `bad magic "abc", want "n+1" or "ni1"`},
		{"magic2.nii", edit(2, func(b []byte) { b[8] = 'x' }), malformed, false, `bad magic "n+2\x00x\n\x1a\n", want "n+2\x00\r\n\x1a\n" or "ni2..."`},
		{"big.nii", big, malformed, false, "header declares 4194304 bytes of samples but the file holds 32"},
		{"big.nii.gz", gz(big), malformed, true, "header declares 4194304 bytes of samples but the decompressed stream ends after 32: unexpected EOF"},
		{"dim0.nii", edit(1, set16(40, 0)), malformed, false, "dim[0] is 0, want 1 to 7"},
		{"dim8.nii", edit(1, set16(40, 8)), malformed, false, "dim[0] is 8, want 1 to 7"},
		{"negdim.nii", edit(1, set16(44, -2)), malformed, false, "dim[2] is -2, want at least 1"},
		{"zerodim.nii", edit(1, set16(46, 0)), malformed, false, "dim[3] is 0, want at least 1"},
		{"overflow.nii", edit(1, dims1(7, 32767, 32767, 32767, 32767, 32767, 32767, 32767)), malformed, false,
			"dimensions 32767x32767x32767x32767x32767x32767x32767 overflow"},
		{"overflow2.nii", edit(2, func(b []byte) {
			binary.LittleEndian.PutUint64(b[16:], 3)
			binary.LittleEndian.PutUint64(b[24:], 1<<40)
			binary.LittleEndian.PutUint64(b[32:], 1<<40)
		}), malformed, false, "dimensions 1099511627776x1099511627776x2 overflow"},
		{"voxoff.nii", edit(1, setF32(108, 4096)), malformed, false, "vox_offset 4096 is beyond the end of the file (384 bytes)"},
		{"voxoff.nii.gz", gz(edit(1, setF32(108, 4096))), malformed, true, "vox_offset 4096 is beyond the end of the stream (384 bytes): unexpected EOF"},
		{"voxin.nii", edit(1, setF32(108, 100)), malformed, false, "vox_offset 100 lies inside the 348-byte header"},
		{"voxnan.nii", edit(1, setF32(108, float32(math.NaN()))), malformed, false, "vox_offset NaN is not a non-negative whole number"},
		{"voxfrac.nii", edit(1, setF32(108, 352.5)), malformed, false, "vox_offset 352.5 is not a non-negative whole number"},
		{"complex.nii", edit(1, set16(70, int16(Complex64))), unsupported, false, "datatype complex64 (32) is not supported; want a real-valued integer or float type"},
		{"rgb.nii", edit(1, set16(70, int16(RGB24))), unsupported, false, "datatype rgb24 (128) is not supported; want a real-valued integer or float type"},
		{"dtype.nii", edit(1, set16(70, 3)), malformed, false, "datatype 3 is not a NIfTI datatype code"},
		{"dim5.nii", edit(1, dims1(5, 2, 2, 2, 1, 3)), unsupported, false, "dim[5] is 3: images of more than 4 dimensions are not supported"},
		{"notgz.nii.gz", []byte("this is not gzip and not nifti either, just text"), malformed, false, "the name ends .gz but the content is neither gzip nor a NIfTI header"},
		{"badgz.nii.gz", []byte{0x1f, 0x8b, 9, 9, 9, 9, 9, 9, 9, 9, 9, 9}, malformed, false, "bad gzip stream: gzip: invalid header"},
		{"crc.nii.gz", crc, malformed, false, "corrupt gzip stream: gzip: invalid checksum"},
		{"cut.nii.gz", gz(validFile(1))[:60], malformed, true, "header declares 32 bytes of samples but the decompressed stream ends after 12: unexpected EOF"},
		{"pair.nii", edit(1, func(b []byte) { copy(b[344:], "ni1\x00") }), malformed, false,
			"header magic says the samples are in a separate .img file, but the name does not end .hdr"},
	}
	dir := t.TempDir()
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			path := filepath.Join(dir, c.name)
			if err := os.WriteFile(path, c.data, 0o644); err != nil {
				t.Fatal(err)
			}
			_, err := Read(path)
			if err == nil {
				t.Fatal("no error")
			}
			want := path + ": nifti: " + c.want
			if err.Error() != want {
				t.Errorf("error\n got %q\nwant %q", err.Error(), want)
			}
			if strings.ContainsAny(err.Error(), "\n\r") {
				t.Error("error spans lines")
			}
			var fe *FormatError
			var ue *UnsupportedError
			switch c.kind {
			case malformed:
				if !errors.As(err, &fe) {
					t.Errorf("%T is not a *FormatError", err)
				}
			case unsupported:
				if !errors.As(err, &ue) {
					t.Errorf("%T is not an *UnsupportedError", err)
				}
			}
			if got := errors.Is(err, io.ErrUnexpectedEOF); got != c.eof {
				t.Errorf("errors.Is(err, io.ErrUnexpectedEOF) = %v", got)
			}
			// ReadHeader and Decode agree on header faults; neither panics.
			ReadHeader(path)
			Decode(bytes.NewReader(c.data), c.name, int64(len(c.data)))
		})
	}
}

func TestTooLarge(t *testing.T) {
	data := edit(1, dims1(3, 128, 128, 64))
	rd := &Reader{MaxBytes: 1 << 20}
	_, _, err := rd.Decode(bytes.NewReader(data), "huge.nii", int64(len(data)))
	want := "huge.nii: nifti: 128x128x64 grid of 1048576 samples needs 4.0 MiB in memory (float32), above the limit of 1.0 MiB"
	if err == nil || err.Error() != want {
		t.Fatalf("error\n got %v\nwant %s", err, want)
	}
	var ue *UnsupportedError
	if !errors.Is(err, ErrTooLarge) || !errors.As(err, &ue) {
		t.Errorf("error %T does not wrap ErrTooLarge as UnsupportedError", err)
	}
}

func TestMissingFile(t *testing.T) {
	_, err := Read("no/such/file.nii")
	if err == nil || !errors.Is(err, os.ErrNotExist) {
		t.Fatalf("error %v does not wrap os.ErrNotExist", err)
	}
	if want := "no/such/file.nii: nifti: cannot open: no such file or directory"; err.Error() != want {
		t.Errorf("error %q, want %q", err, want)
	}
}

// TestDecodeUnknownSize: a plain stream of unknown length that ends early
// is found when it ends.
func TestDecodeUnknownSize(t *testing.T) {
	data := edit(1, dims1(3, 16, 16, 16))
	_, _, err := Decode(bytes.NewReader(data), "pipe.nii", -1)
	want := "pipe.nii: nifti: header declares 16384 bytes of samples but the stream ends after 32: unexpected EOF"
	if err == nil || err.Error() != want {
		t.Fatalf("error\n got %v\nwant %s", err, want)
	}
}
