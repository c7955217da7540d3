package dicom

import (
	"encoding/binary"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// fileWith builds a Part-10 file of a 3×2 uint16 MR image (explicit VR
// little endian unless ts says otherwise); edit may change the data set.
func fileWith(ts string, edit func(d *dataset)) []byte {
	var d dataset
	d.str(0x00080008, "CS", "ORIGINAL", "PRIMARY", "M", "ND")
	d.str(0x00080016, "UI", sopMR)
	d.str(0x00080018, "UI", "2.25.1")
	d.str(0x0020000E, "UI", "2.25.2")
	d.is(0x00200011, 5)
	d.ds(0x00180081, 10)
	d.ds(0x00200032, 0, 0, 0)
	d.ds(0x00200037, 1, 0, 0, 0, 1, 0)
	d.ds(0x00280030, 1, 1)
	d.us(0x00280002, 1)
	d.us(0x00280010, 2)
	d.us(0x00280011, 3)
	d.us(0x00280100, 16)
	d.us(0x00280101, 16)
	d.us(0x00280103, 0)
	d.put(0x7FE00010, "OW", make([]byte, 12))
	if edit != nil {
		edit(&d)
	}
	var meta dataset
	meta.str(0x00020002, "UI", sopMR)
	meta.str(0x00020010, "UI", ts)
	mb := meta.bytes()
	var g dataset
	g.ul(0x00020000, uint32(len(mb)))
	out := append(make([]byte, 128), "DICM"...)
	out = append(out, g.bytes()...)
	out = append(out, mb...)
	return append(out, d.bytes()...)
}

// drop removes an element.
func (d *dataset) drop(tag uint32) {
	for i, e := range d.elems {
		if e.tag == tag {
			d.elems = append(d.elems[:i], d.elems[i+1:]...)
			return
		}
	}
}

// raw adds an element given as bytes after its tag.
func (d *dataset) raw(tag uint32, b ...byte) {
	h := binary.LittleEndian.AppendUint16(nil, uint16(tag>>16))
	h = binary.LittleEndian.AppendUint16(h, uint16(tag))
	d.elems = append(d.elems, element{tag, append(h, b...)})
}

func replace(tag uint32, f func(d *dataset)) func(d *dataset) {
	return func(d *dataset) { d.drop(tag); f(d) }
}

func le32(v uint32) []byte { return binary.LittleEndian.AppendUint32(nil, v) }

// nested returns n levels of sequences, each with one item.
func nested(n int) []byte {
	var inner []byte
	for i := 0; i < n; i++ {
		item := append([]byte{0xFE, 0xFF, 0x00, 0xE0}, le32(uint32(len(inner)))...)
		item = append(item, inner...)
		el := []byte{0x08, 0x00, 0x15, 0x11, 'S', 'Q', 0, 0}
		el = append(el, le32(uint32(len(item)))...)
		inner = append(el, item...)
	}
	return inner
}

// TestBrokenInputs runs a table of malformed and unsupported files; each
// must give its error text, one line starting with the file name, from
// Scan (as a Problem) or from Load. The encoding rules broken are from
// PS3.5 §7 and PS3.10 §7.1.
func TestBrokenInputs(t *testing.T) {
	valid := fileWith(tsExplicitLE, nil)
	cases := []struct {
		name    string
		data    []byte
		scan    string // expected in the scan problem, "" if the scan succeeds
		load    string // expected in the load error
		kind    any    // *FormatError, *UnsupportedError or *SeriesError
		skipped bool   // not DICOM at all
	}{
		{name: "empty", data: nil, scan: "file is empty (0 bytes)", kind: &FormatError{}},
		{name: "text", data: []byte("hello, this is not DICOM at all\n"), skipped: true},
		{name: "nifti-like", data: append(le32(348), make([]byte, 400)...), skipped: true},
		{name: "header cut", data: valid[:300], scan: "truncated: element", kind: &FormatError{}},
		{name: "pixel data cut", data: valid[:len(valid)-5], scan: "truncated: pixel data at byte", kind: &FormatError{}},
		{name: "meta cut", data: valid[:140], scan: "file meta element (0002,0000) declares 4 bytes but the file ends at byte 140", kind: &FormatError{}},
		{name: "huge length", data: fileWith(tsExplicitLE, func(d *dataset) {
			d.raw(0x00081030, append([]byte{'U', 'T', 0, 0}, le32(0x7FFFFFF0)...)...)
		}), scan: "truncated: element (0008,1030) at byte 296 needs 2147483632 bytes but the file ends at byte 460", kind: &FormatError{}},
		{name: "non-item in sequence", data: fileWith(tsExplicitLE, func(d *dataset) {
			d.raw(0x00081115, append(append([]byte{'S', 'Q', 0, 0}, le32(8)...), 0x08, 0x00, 0x20, 0x00, 'D', 'A', 0, 0)...)
		}), scan: "inside a sequence is not an item", kind: &FormatError{}},
		{name: "item overruns sequence", data: fileWith(tsExplicitLE, func(d *dataset) {
			d.raw(0x00081115, append(append(append([]byte{'S', 'Q', 0, 0}, le32(8)...), 0xFE, 0xFF, 0x00, 0xE0), le32(100)...)...)
		}), scan: "but its sequence ends at byte", kind: &FormatError{}},
		{name: "invalid VR", data: fileWith(tsExplicitLE, func(d *dataset) {
			d.raw(0x00081030, '1', '2', 0, 0)
		}), scan: `invalid VR "12" in element (0008,1030)`, kind: &FormatError{}},
		{name: "deep nesting", data: fileWith(tsExplicitLE, func(d *dataset) {
			d.elems = append(d.elems, element{0x00081115, nested(40)})
		}), scan: "sequences nested deeper than 16", kind: &FormatError{}},
		{name: "unknown transfer syntax", data: fileWith("1.2.3.4.5", nil), scan: `unknown transfer syntax "1.2.3.4.5"`, kind: &UnsupportedError{}},
		{name: "JPEG-LS", data: fileWith("1.2.840.10008.1.2.4.80", nil), load: "pixel data of defined length in the compressed transfer syntax JPEG-LS Lossless Image Compression (1.2.840.10008.1.2.4.80)", kind: &FormatError{}},
		// A present RescaleSlope of 0, NaN or Inf, or text that is no
		// number, cannot scale pixels (PS3.3 C.11.1.1.2 defines the
		// identity only for an absent Modality LUT): the file is refused,
		// never read with a slope of 1.
		{name: "slope 0", data: fileWith(tsExplicitLE, func(d *dataset) { d.ds(0x00281053, 0); d.ds(0x00281052, 0) }),
			scan: "RescaleSlope (0028,1053) is 0: every pixel would take the intercept's value", kind: &FormatError{}},
		{name: "slope NaN", data: fileWith(tsExplicitLE, func(d *dataset) { d.str(0x00281053, "DS", "NaN") }),
			scan: "RescaleSlope (0028,1053) is NaN", kind: &FormatError{}},
		{name: "slope Inf", data: fileWith(tsExplicitLE, func(d *dataset) { d.str(0x00281053, "DS", "1e999") }),
			scan: `RescaleSlope (0028,1053) "1e999" is not a finite number`, kind: &FormatError{}},
		{name: "slope text", data: fileWith(tsExplicitLE, func(d *dataset) { d.str(0x00281053, "DS", "two") }),
			scan: `RescaleSlope (0028,1053) "two" is not a finite number`, kind: &FormatError{}},
		{name: "intercept NaN", data: fileWith(tsExplicitLE, func(d *dataset) { d.str(0x00281052, "DS", "nan") }),
			scan: "RescaleIntercept (0028,1052) is NaN", kind: &FormatError{}},
		{name: "RLE", data: fileWith("1.2.840.10008.1.2.5", nil), load: "pixel data of defined length in the compressed transfer syntax RLE Lossless (1.2.840.10008.1.2.5)", kind: &FormatError{}},
		{name: "zero rows", data: fileWith(tsExplicitLE, replace(0x00280010, func(d *dataset) { d.us(0x00280010, 0) })), scan: "impossible matrix 3×0", kind: &FormatError{}},
		{name: "frames", data: fileWith(tsExplicitLE, func(d *dataset) { d.is(0x00280008, 10000000) }), scan: "impossible NumberOfFrames 10000000", kind: &FormatError{}},
		{name: "no series UID", data: fileWith(tsExplicitLE, func(d *dataset) { d.drop(0x0020000E) }), scan: "image without SeriesInstanceUID", kind: &FormatError{}},
		{name: "no rows", data: fileWith(tsExplicitLE, func(d *dataset) { d.drop(0x00280010) }), scan: "image without Rows (0028,0010)", kind: &FormatError{}},
		{name: "short pixel data", data: fileWith(tsExplicitLE, replace(0x7FE00010, func(d *dataset) { d.put(0x7FE00010, "OW", make([]byte, 8)) })),
			load: "pixel data has 8 bytes but 1 frames of 3×2 samples of 16 bits need 12", kind: &FormatError{}},
		{name: "12-bit allocation", data: fileWith(tsExplicitLE, replace(0x00280100, func(d *dataset) { d.us(0x00280100, 12) })),
			load: "BitsAllocated 12", kind: &UnsupportedError{}},
		{name: "colour", data: fileWith(tsExplicitLE, replace(0x00280002, func(d *dataset) { d.us(0x00280002, 3) })),
			load: "3 samples per pixel", kind: &UnsupportedError{}},
		{name: "no orientation", data: fileWith(tsExplicitLE, func(d *dataset) { d.drop(0x00200037) }),
			load: "no ImageOrientationPatient (0020,0037)", kind: &SeriesError{}},
		{name: "bad orientation", data: fileWith(tsExplicitLE, replace(0x00200037, func(d *dataset) { d.ds(0x00200037, 1, 0, 0, 1, 0, 0) })),
			load: "is not a pair of unit vectors at right angles", kind: &SeriesError{}},
		{name: "zero spacing", data: fileWith(tsExplicitLE, replace(0x00280030, func(d *dataset) { d.ds(0x00280030, 0, 1) })),
			load: `PixelSpacing 0\1 is not positive`, kind: &SeriesError{}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			path := filepath.Join(dir, "f")
			if err := os.WriteFile(path, tc.data, 0o644); err != nil {
				t.Fatal(err)
			}
			c, err := Scan([]string{dir}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if tc.skipped {
				if c.Skipped != 1 || len(c.Problems) != 0 || len(c.Series) != 0 {
					t.Errorf("skipped %d, problems %v", c.Skipped, c.Problems)
				}
				return
			}
			var got error
			if tc.scan != "" {
				if len(c.Problems) != 1 || c.Unreadable != 1 {
					t.Fatalf("problems %v, unreadable %d", c.Problems, c.Unreadable)
				}
				got = c.Problems[0].Err
				if !strings.Contains(got.Error(), tc.scan) {
					t.Errorf("scan error %q, want %q", got, tc.scan)
				}
			} else {
				if len(c.Series) != 1 {
					t.Fatalf("%d series, problems %v", len(c.Series), c.Problems)
				}
				_, got = LoadSeries(c.Series[0])
				if got == nil || !strings.Contains(got.Error(), tc.load) {
					t.Fatalf("load error %v, want %q", got, tc.load)
				}
			}
			if s := got.Error(); !strings.HasPrefix(s, path+": dicom: ") && !strings.HasPrefix(s, dir+": dicom: ") || strings.ContainsAny(s, "\r\n") {
				t.Errorf("error text %q does not start with the path or is not one line", s)
			}
			switch tc.kind.(type) {
			case *FormatError:
				var e *FormatError
				if !errors.As(got, &e) {
					t.Errorf("%T, want *FormatError", got)
				}
			case *UnsupportedError:
				var e *UnsupportedError
				if !errors.As(got, &e) {
					t.Errorf("%T, want *UnsupportedError", got)
				}
			case *SeriesError:
				var e *SeriesError
				if !errors.As(got, &e) || !errors.Is(got, ErrIncomplete) {
					t.Errorf("%T, want *SeriesError", got)
				}
			}
		})
	}
}

// TestBrokenSeries checks the broken folders written by pydicom
// (testdata/gen/dicom_refs.py): the scan records the problem and goes on,
// and Load refuses the incomplete series naming the slice and echo.
func TestBrokenSeries(t *testing.T) {
	refs := loadRefs(t)
	cases := []struct {
		key, dir   string
		problems   []string // in Catalog.Problems, in order
		load       string   // Load error of the main series
		unreadable int
	}{
		{"truncated", "broken/truncated", []string{
			refs.Series["truncated"].Truncated + ": dicom: truncated: pixel data at byte 1174 declares 40 bytes but the file ends at byte 1201",
			"series 20-", // the incomplete series is a problem too
		}, "slice 2 of 2 (2 mm along the slice normal) has no image at EchoTime 20 ms (echo 2)", 1},
		{"missing", "broken/missing", []string{"series 21-"},
			"slice 2 of 3 (2 mm along the slice normal) has no image at EchoTime 30 ms (echo 3)", 0},
		{"matrix", "broken/matrix", []string{
			refs.Series["matrix"].Odd + ": dicom: matrix 5×6 (Columns×Rows) differs from 5×4 of the other 3 images of series 22",
			"series 22-"}, "slice 1 of 2 (0 mm along the slice normal) has no image at EchoTime 20 ms (echo 2)", 0},
		{"uneven", "broken/uneven", []string{"uneven slice spacing: slice 2 of 3 is 0.5 mm off an even step of 3.5 mm (tolerance 0.035 mm)"},
			"uneven slice spacing", 0},
	}
	for _, tc := range cases {
		t.Run(tc.key, func(t *testing.T) {
			c := scanOne(t, tc.dir, nil)
			if c.Unreadable != tc.unreadable || len(c.Problems) != len(tc.problems) {
				t.Fatalf("unreadable %d, problems %v", c.Unreadable, c.Problems)
			}
			for i, want := range tc.problems {
				if got := c.Problems[i].String(); !strings.Contains(filepath.ToSlash(got), want) {
					t.Errorf("problem %d = %q, want %q", i, got, want)
				}
			}
			s := byUID(c, refs.Series[tc.key].UID)
			if s == nil {
				t.Fatal("series not found")
			}
			for _, p := range c.Series {
				if len(p.frames) > len(s.frames) {
					s = p
				}
			}
			_, err := c.Load(s.ID)
			if err == nil || !strings.Contains(err.Error(), tc.load) || !errors.Is(err, ErrIncomplete) {
				t.Errorf("load error %v, want %q", err, tc.load)
			}
			if s.Problem == "" {
				t.Error("Series.Problem is empty")
			}
		})
	}
}

// TestCompressed checks the JPEG Baseline file written by pydicom with
// bogus bytes in its fragment: it is scanned as a series, and loading
// gives a FormatError that names the transfer syntax (UID
// 1.2.840.10008.1.2.4.50, check-values §3.3 / pydicom UID dictionary) and
// the broken stream.
func TestCompressed(t *testing.T) {
	refs := loadRefs(t)
	c := scanOne(t, "compressed", nil)
	if len(c.Series) != 1 {
		t.Fatalf("%d series", len(c.Series))
	}
	_, err := LoadSeries(c.Series[0])
	var u *FormatError
	want := "JPEG Baseline (Process 1): malformed compressed pixel data"
	if refs.Series["compressed"].TransferSyntax != tsJPEGBaseline {
		t.Errorf("the file's syntax is %s", refs.Series["compressed"].TransferSyntax)
	}
	if !errors.As(err, &u) || !strings.Contains(err.Error(), want) {
		t.Errorf("error %v, want FormatError with %q", err, want)
	}
}
