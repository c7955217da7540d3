package dicom

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestUNElements: explicit VR files may carry elements of VR UN (PS3.5
// §6.2.2). With a defined length the value is the original little-endian
// encoding: EchoTime written as UN "20" is read by the dictionary VR (DS)
// as 20 ms. With undefined length the value is a sequence in implicit VR
// little endian: a private one and a standard one (ReferencedSeriesSequence)
// are walked and the file is read.
func TestUNElements(t *testing.T) {
	implicitItem := func() []byte {
		// (0008,1150) UI "1.2" in implicit VR inside one item of
		// undefined length, then the item and sequence delimiters.
		var b []byte
		b = append(b, 0xFE, 0xFF, 0x00, 0xE0, 0xFF, 0xFF, 0xFF, 0xFF)
		b = append(b, 0x08, 0x00, 0x50, 0x11)
		b = append(b, le32(4)...)
		b = append(b, '1', '.', '2', 0)
		b = append(b, 0xFE, 0xFF, 0x0D, 0xE0, 0, 0, 0, 0)
		b = append(b, 0xFE, 0xFF, 0xDD, 0xE0, 0, 0, 0, 0)
		return b
	}
	undefinedUN := append([]byte{'U', 'N', 0, 0, 0xFF, 0xFF, 0xFF, 0xFF}, implicitItem()...)
	data := fileWith(tsExplicitLE, func(d *dataset) {
		d.drop(0x00180081)
		d.raw(0x00180081, append([]byte{'U', 'N', 0, 0}, append(le32(2), '2', '0')...)...)
		d.raw(0x00081115, undefinedUN...)
		d.raw(0x00091010, undefinedUN...)
	})
	dir := t.TempDir()
	path := filepath.Join(dir, "un.dcm")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	c, err := Scan([]string{dir}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Series) != 1 || len(c.Problems) != 0 {
		t.Fatalf("series %d, problems %v", len(c.Series), c.Problems)
	}
	if s := c.Series[0]; !strings.Contains(s.Fixed, "TE 20 ms") {
		t.Errorf("fixed parameters %q, want TE 20 ms from the UN element", s.Fixed)
	}
	im, err := LoadSeries(c.Series[0])
	if err != nil {
		t.Fatal(err)
	}
	if im.Acq[0].EchoTime != 20 {
		t.Errorf("echo time %g", im.Acq[0].EchoTime)
	}
}
