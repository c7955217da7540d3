package dicom

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestSafeName checks the file-name sanitiser on hostile strings (the
// rules are this package's own; see SafeName).
func TestSafeName(t *testing.T) {
	cases := []struct{ in, want string }{
		{"T2 map / axial", "T2_map_axial"},
		{"../../etc/passwd", "etc_passwd"},
		{"..", "unnamed"},
		{"", "unnamed"},
		{"a\x00b\nc\td", "a_b_c_d"},
		{"-rf", "rf"},
		{"Série ñ 5", "S_rie_5"},
		{"x..y", "x.y"},
		{`C:\scans\T1`, "C_scans_T1"},
		{strings.Repeat("a", 100), strings.Repeat("a", DefaultNameLength)},
	}
	for _, tc := range cases {
		if got := SafeName(tc.in, 0); got != tc.want {
			t.Errorf("SafeName(%q) = %q, want %q", tc.in, got, tc.want)
		}
	}
	if got := SafeName("abcdef", 3); got != "abc" {
		t.Errorf("max 3: %q", got)
	}
}

// TestRFC3339 converts DICOM DT values (PS3.5 Table 6.2-1: YYYYMMDDHHMMSS.FFFFFF&ZZXX).
func TestRFC3339(t *testing.T) {
	cases := []struct{ in, want string }{
		{"20240521093000.000000", "2024-05-21T09:30:00.000000"},
		{"20240521093000+0200", "2024-05-21T09:30:00+02:00"},
		{"202405210930", "2024-05-21T09:30:00"},
		{"20240521", "2024-05-21T00:00:00"},
		{"2024052109300", ""}, // odd length
		{"garbage", ""},
		{"20240521093000+2", ""},
	}
	for _, tc := range cases {
		if got := rfc3339(tc.in); got != tc.want {
			t.Errorf("rfc3339(%q) = %q, want %q", tc.in, got, tc.want)
		}
	}
}

// TestIdentifiers checks that no patient identifier written by
// dicom_refs.py ("Phantom^Test", "PHANTOM-001", "19000101", "ACC0001")
// leaves the package unless KeepIdentifiers is set.
func TestIdentifiers(t *testing.T) {
	c := scanOne(t, "mix", nil)
	b, err := json.Marshal(c)
	if err != nil {
		t.Fatal(err)
	}
	for _, id := range []string{"Phantom", "PHANTOM-001", "19000101", "ACC0001"} {
		if strings.Contains(string(b), id) {
			t.Errorf("catalog JSON contains %q", id)
		}
	}
	for _, s := range c.Series {
		im, err := LoadSeries(s)
		if err != nil {
			t.Fatal(err)
		}
		b, _ := json.Marshal(im.Source)
		if strings.Contains(string(b), "Phantom") {
			t.Errorf("source %s", b)
		}
	}
	k := scanOne(t, "mix", &ScanOptions{KeepIdentifiers: true})
	id := k.Series[0].Identifiers
	if id == nil || id.PatientName != "Phantom^Test" || id.PatientID != "PHANTOM-001" || id.PatientBirthDate != "19000101" || id.AccessionNumber != "ACC0001" {
		t.Errorf("identifiers %+v", id)
	}
}

// TestLookup finds a series by ID, UID and number.
func TestLookup(t *testing.T) {
	refs := loadRefs(t)
	c := scanOne(t, "mix", nil)
	s := byUID(c, refs.Series["oblique_se"].UID)
	for _, key := range []string{s.ID, s.UID, "3"} {
		if got, err := c.Lookup(key); err != nil || got != s {
			t.Errorf("Lookup(%q) = %v, %v", key, got, err)
		}
	}
	if _, err := c.Lookup("99"); err == nil || !strings.Contains(err.Error(), `no series "99"`) {
		t.Errorf("Lookup(99): %v", err)
	}
	// IDs are stable across scans.
	if again := scanOne(t, "mix", nil); again.Series[0].ID != c.Series[0].ID {
		t.Error("ID changed between scans")
	}
}

// writeFiles writes the given files into a new folder and scans it.
func writeFiles(t *testing.T, files ...[]byte) *Catalog {
	t.Helper()
	dir := t.TempDir()
	for i, b := range files {
		if err := os.WriteFile(filepath.Join(dir, fmt.Sprintf("f%d", i)), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	c, err := Scan([]string{dir}, nil)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

func set(tag uint32, f func(d *dataset)) func(d *dataset) { return replace(tag, f) }

func both(fs ...func(d *dataset)) func(d *dataset) {
	return func(d *dataset) {
		for _, f := range fs {
			f(d)
		}
	}
}

// TestEchoNumbers: equal echo times but different EchoNumbers make two
// volumes ordered by echo number.
func TestEchoNumbers(t *testing.T) {
	c := writeFiles(t,
		fileWith(tsExplicitLE, func(d *dataset) { d.is(0x00180086, 2) }),
		fileWith(tsExplicitLE, func(d *dataset) { d.is(0x00180086, 1) }))
	if len(c.Series) != 1 {
		t.Fatalf("%d series", len(c.Series))
	}
	s := c.Series[0]
	if s.Varying != "EchoNumber" || s.Volumes != 2 || s.Slices != 1 || s.Echo != "" {
		t.Errorf("varying %q volumes %d slices %d echo %q", s.Varying, s.Volumes, s.Slices, s.Echo)
	}
}

// TestSplitImageType: magnitude and phase images of one series become two
// series.
func TestSplitImageType(t *testing.T) {
	c := writeFiles(t,
		fileWith(tsExplicitLE, nil),
		fileWith(tsExplicitLE, set(0x00080008, func(d *dataset) { d.str(0x00080008, "CS", "ORIGINAL", "PRIMARY", "P", "ND") })))
	if len(c.Series) != 2 || c.Series[0].ID == c.Series[1].ID || len(c.Problems) != 0 {
		t.Fatalf("series %d, problems %v", len(c.Series), c.Problems)
	}
	if !strings.Contains(c.Series[0].Notes[0], "was split") {
		t.Errorf("notes %v", c.Series[0].Notes)
	}
}

// TestPixelTypes decodes stored values of each sample type with rescale
// (PS3.3 C.7.6.3.1: BitsStored, PixelRepresentation; C.11.1.1.2:
// output = m·SV + b).
func TestPixelTypes(t *testing.T) {
	le16 := func(v ...int) []byte {
		var b []byte
		for _, x := range v {
			b = binary.LittleEndian.AppendUint16(b, uint16(int16(x)))
		}
		return b
	}
	f32 := func(v ...float32) []byte {
		var b []byte
		for _, x := range v {
			b = binary.LittleEndian.AppendUint32(b, math.Float32bits(x))
		}
		return b
	}
	cases := []struct {
		name string
		edit func(d *dataset)
		want []float32
	}{
		{"uint16 rescaled", both(
			set(0x7FE00010, func(d *dataset) { d.put(0x7FE00010, "OW", le16(0, 1, 2, 65535-65536, 100, 7)) }),
			func(d *dataset) { d.ds(0x00281053, 0.5); d.ds(0x00281052, -3) }),
			[]float32{-3, -2.5, -2, 32764.5, 47, 0.5}},
		{"int16", both(
			set(0x00280103, func(d *dataset) { d.us(0x00280103, 1) }),
			set(0x7FE00010, func(d *dataset) { d.put(0x7FE00010, "OW", le16(-1, -32768, 32767, 0, 5, -5)) })),
			[]float32{-1, -32768, 32767, 0, 5, -5}},
		{"int16 in 12 bits", both(
			set(0x00280103, func(d *dataset) { d.us(0x00280103, 1) }),
			set(0x00280101, func(d *dataset) { d.us(0x00280101, 12) }),
			set(0x7FE00010, func(d *dataset) { d.put(0x7FE00010, "OW", le16(0x0FFF, 0x0800, 0x07FF, 0xF001, 5, 0)) })),
			[]float32{-1, -2048, 2047, 1, 5, 0}},
		{"float32", set(0x7FE00010, func(d *dataset) { d.put(0x7FE00008, "OF", f32(1.5, -2.25, 0, 1e6, 3, 4)) }),
			[]float32{1.5, -2.25, 0, 1e6, 3, 4}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c := writeFiles(t, fileWith(tsExplicitLE, tc.edit))
			if len(c.Series) != 1 {
				t.Fatalf("series %d, problems %v", len(c.Series), c.Problems)
			}
			im, err := LoadSeries(c.Series[0])
			if err != nil {
				t.Fatal(err)
			}
			for i, w := range tc.want {
				if im.Data[i] != w {
					t.Errorf("sample %d = %g, want %g", i, im.Data[i], w)
				}
			}
		})
	}
}
