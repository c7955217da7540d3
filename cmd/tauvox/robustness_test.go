package main

import (
	"bytes"
	"compress/gzip"
	"database/sql"
	"encoding/binary"
	"encoding/json"
	"io"
	"io/fs"
	"math"
	"os"
	"os/signal"
	"path/filepath"
	"sort"
	"strings"
	"syscall"
	"testing"

	_ "modernc.org/sqlite"
)

// TestMain lets the test binary act as the tauvox command for the
// subprocess tests (interrupt, kill, full disk): with TAUVOX_TEST_CHILD=1
// it runs main() on its arguments. TAUVOX_TEST_FSIZE=N first limits the
// size of any file the child writes to N bytes (RLIMIT_FSIZE; SIGXFSZ is
// ignored so that a write past the limit fails with EFBIG instead of
// killing the process), a disk that fills up without needing root.
func TestMain(m *testing.M) {
	if os.Getenv("TAUVOX_TEST_CHILD") == "1" {
		if n := os.Getenv("TAUVOX_TEST_FSIZE"); n != "" {
			var lim uint64
			for _, c := range n {
				lim = 10*lim + uint64(c-'0')
			}
			signal.Ignore(syscall.SIGXFSZ)
			if err := syscall.Setrlimit(syscall.RLIMIT_FSIZE, &syscall.Rlimit{Cur: lim, Max: lim}); err != nil {
				os.Stderr.WriteString("setrlimit: " + err.Error() + "\n")
				os.Exit(3)
			}
		}
		os.Args = append([]string{"tauvox"}, os.Args[1:]...)
		main()
	}
	os.Exit(m.Run())
}

// fixtures are the good and bad inputs of the robustness catalogue, all
// under one root so that a test can see every file a command writes.
type fixtures struct {
	root       string
	nii        string // simulated t2 series, NIfTI + sidecar (16×16×2, 16 echoes)
	raw        []byte // its uncompressed NIfTI bytes
	dcm        string // the same series as DICOM (32 files)
	maps       string // a t2 fit of nii
	qa         string // a qa.json of maps
	db         string // a history database holding qa
	mapsBefore int
}

func (f *fixtures) path(name string) string { return filepath.Join(f.root, name) }

func (f *fixtures) write(t *testing.T, name string, b []byte) string {
	t.Helper()
	p := f.path(name)
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(p, b, 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// niiWith writes the series' NIfTI bytes changed by edit.
func (f *fixtures) niiWith(t *testing.T, name string, edit func(b []byte) []byte) string {
	b := append([]byte(nil), f.raw...)
	return f.write(t, name, edit(b))
}

// seriesWithSidecar writes the series under name with the given sidecar.
func (f *fixtures) seriesWithSidecar(t *testing.T, name, side string) string {
	z, err := os.ReadFile(f.nii)
	if err != nil {
		t.Fatal(err)
	}
	p := f.write(t, name+".nii.gz", z)
	f.write(t, name+".json", []byte(side))
	return p
}

// dicomWith copies the DICOM series and changes its first file by edit.
func (f *fixtures) dicomWith(t *testing.T, name string, edit func(t *testing.T, b []byte)) string {
	t.Helper()
	dir := f.path(name)
	names, _ := filepath.Glob(filepath.Join(f.dcm, "*"))
	sort.Strings(names)
	for i, p := range names {
		b, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		if i == 0 {
			edit(t, b)
		}
		f.write(t, filepath.Join(name, filepath.Base(p)), b)
	}
	return dir
}

// dicomElement returns the offset of the explicit-VR little-endian element
// tag with vr in b.
func dicomElement(t *testing.T, b []byte, group, elem uint16, vr string) int {
	t.Helper()
	key := binary.LittleEndian.AppendUint16(binary.LittleEndian.AppendUint16(nil, group), elem)
	key = append(key, vr...)
	i := bytes.Index(b, key)
	if i < 0 {
		t.Fatalf("no element (%04X,%04X) %s", group, elem, vr)
	}
	return i
}

func newFixtures(t *testing.T) *fixtures {
	t.Helper()
	f := &fixtures{root: t.TempDir()}
	sim := f.path("sim")
	if code, _, e := tauvox(t, "simulate", "--kind", "t2", "--out", sim, "--matrix", "16", "--slices", "2"); code != 0 {
		t.Fatal(e)
	}
	f.nii = filepath.Join(sim, "t2.nii.gz")
	z, _ := os.ReadFile(f.nii)
	zr, err := gzip.NewReader(bytes.NewReader(z))
	if err != nil {
		t.Fatal(err)
	}
	if f.raw, err = io.ReadAll(zr); err != nil {
		t.Fatal(err)
	}
	if code, _, e := tauvox(t, "simulate", "--kind", "t2", "--format", "dicom", "--out", f.path("dsim"), "--matrix", "16", "--slices", "2"); code != 0 {
		t.Fatal(e)
	}
	f.dcm = f.path("dsim/t2")
	f.maps = f.path("maps")
	if code, _, e := tauvox(t, "fit", f.nii, "--model", "t2", "--out", f.maps, "--quiet"); code != 0 {
		t.Fatal(e)
	}
	// The QA session comes from a full-size simulation (the 16×16 maps hold
	// too few vials for their identity to be told): 96×96, one slice.
	qsim := f.path("qsim")
	if code, _, e := tauvox(t, "simulate", "--kind", "t2", "--out", qsim, "--slices", "1"); code != 0 {
		t.Fatal(e)
	}
	if code, _, e := tauvox(t, "fit", filepath.Join(qsim, "t2.nii.gz"), "--model", "t2", "--out", f.path("qmaps"), "--quiet", "--no-preview"); code != 0 {
		t.Fatal(e)
	}
	qa := f.path("qa")
	if code, _, e := tauvox(t, "phantom", f.path("qmaps"), "--def", "demo", "--temperature", "20", "--date", "2026-05-01", "--out", qa); code > 1 {
		t.Fatal(e)
	}
	f.qa = filepath.Join(qa, "qa.json")
	f.db = f.path("h.db")
	if code, _, e := tauvox(t, "history", "add", "--db", f.db, f.qa); code != 0 {
		t.Fatal(e)
	}
	return f
}

// snapshot lists every file and folder under root with its size and
// content hash (folders: "dir").
func snapshot(t *testing.T, root string) map[string]string {
	t.Helper()
	m := map[string]string{}
	filepath.WalkDir(root, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return nil
		}
		if d.IsDir() {
			m[p] = "dir"
			return nil
		}
		if !d.Type().IsRegular() {
			m[p] = "special " + d.Type().String() // a FIFO is never opened: it would block
			return nil
		}
		b, _ := os.ReadFile(p)
		m[p] = string(rune(len(b))) + string(b)
		return nil
	})
	return m
}

func diffSnapshots(before, after map[string]string) []string {
	var out []string
	for p, v := range after {
		if w, ok := before[p]; !ok {
			out = append(out, "new "+p)
		} else if w != v {
			out = append(out, "changed "+p)
		}
	}
	for p := range before {
		if _, ok := after[p]; !ok {
			out = append(out, "removed "+p)
		}
	}
	sort.Strings(out)
	return out
}

// TestRobustnessCatalogue runs every entry of the catalogue of bad inputs
// in docs/robustness.md: each gives exit code 2 and one line on stderr
// naming the file and the problem, and leaves every file under the test's
// root as it was (no output, no temporary file, inputs untouched).
func TestRobustnessCatalogue(t *testing.T) {
	f := newFixtures(t)
	le16 := func(b []byte, off int, v int16) { binary.LittleEndian.PutUint16(b[off:], uint16(v)) }
	// NIfTI-1 header offsets: sizeof_hdr 0, dim 40, datatype 70,
	// vox_offset 108 (NIfTI-1 standard, nifti1.h).
	short := f.niiWith(t, "short.nii", func(b []byte) []byte { return b[:len(b)/2] })
	huge := f.niiWith(t, "huge.nii", func(b []byte) []byte {
		for i, v := range []int16{4, 32767, 32767, 32767, 32767, 1, 1, 1} {
			le16(b, 40+2*i, v)
		}
		return b
	})
	negdim := f.niiWith(t, "negdim.nii", func(b []byte) []byte { le16(b, 42, -3); return b })
	dtype := f.niiWith(t, "dtype.nii", func(b []byte) []byte { le16(b, 70, 9999); return b })
	voxoff := f.niiWith(t, "voxoff.nii", func(b []byte) []byte {
		binary.LittleEndian.PutUint32(b[108:], math.Float32bits(1e9))
		return b
	})
	sizeof := f.niiWith(t, "sizeof.nii", func(b []byte) []byte { binary.LittleEndian.PutUint32(b, 123); return b })
	z, _ := os.ReadFile(f.nii)
	cutgz := f.write(t, "cut.nii.gz", z[:len(z)*2/3])
	notgz := f.write(t, "notgz.nii.gz", append([]byte{0x1f, 0x8b}, bytes.Repeat([]byte("tauvox"), 300)...))
	text := f.write(t, "notes.nii", bytes.Repeat([]byte("this is a text file, not an image. "), 20))
	empty := f.write(t, "empty.nii", nil)

	sideBad := f.seriesWithSidecar(t, "sbad", `{"EchoTime": [0.01,`)
	sideStr := f.seriesWithSidecar(t, "sstr", `{"EchoTime": "ten"}`)
	sideNeg := f.seriesWithSidecar(t, "sneg", `{"EchoTime": [-0.01, 0.02, 0.03, 0.04, 0.05, 0.06, 0.07, 0.08, 0.09, 0.10, 0.11, 0.12, 0.13, 0.14, 0.15, 0.16]}`)
	sideArr := f.seriesWithSidecar(t, "sarr", `[1, 2]`)
	sideLen := f.seriesWithSidecar(t, "slen", `{"EchoTime": [0.01, 0.02, 0.03]}`)

	emptyDir := f.path("emptydir")
	os.Mkdir(emptyDir, 0o755)
	descLen := f.dicomWith(t, "d_desclen", func(t *testing.T, b []byte) {
		i := dicomElement(t, b, 0x0008, 0x103E, "LO") // SeriesDescription, 2-byte length
		binary.LittleEndian.PutUint16(b[i+6:], 0xFFFE)
	})
	pixLen := f.dicomWith(t, "d_pixlen", func(t *testing.T, b []byte) {
		i := dicomElement(t, b, 0x7FE0, 0x0010, "OW") // PixelData, 4-byte length after 2 reserved
		binary.LittleEndian.PutUint32(b[i+8:], 0x7FFFFFF0)
	})
	matrix := f.dicomWith(t, "d_matrix", func(t *testing.T, b []byte) {
		binary.LittleEndian.PutUint16(b[dicomElement(t, b, 0x0028, 0x0010, "US")+8:], 0xFFFF) // Rows
		binary.LittleEndian.PutUint16(b[dicomElement(t, b, 0x0028, 0x0011, "US")+8:], 0xFFFF) // Columns
	})
	broken := func(name string) string { return filepath.Join("..", "..", "testdata", "dicom", "broken", name) }

	const head = "name,x,y,z,radius,space\n"
	list := func(name, s string) string { return f.write(t, name, []byte(s)) }
	r1 := list("r1.csv", "name,x,y,radius,space\nA,1,2,3,mm\n")
	r2 := list("r2.csv", head+"A,1,2,abc,4,mm\n")
	r3 := list("r3.csv", head+"A,1,2,3,4,inch\n")
	r4 := list("r4.csv", head+"A,1,2,3,4,mm\nA,1,2,3,4,mm\n")
	r5 := list("r5.json", `[{"name":"A","x":1,"y":2,"z":3,"radius":4,"space":"mm","colour":"red"}]`)
	r6 := list("r6.csv", head+"A,1000,2000,3000,4,mm\n")
	r7 := list("r7.csv", head)
	r8 := list("r8.csv", head+"A,1,2,NaN,4,mm\n")
	r9 := list("r9.csv", head+"\"A,1,2,3,4,mm\n")
	r10 := list("r10.json", `[{"name":"A","x":1,`)
	r11 := list("r11.csv", head+"A,1,2,3,0,mm\n")

	vial := `{"id":"a","x_mm":0,"y_mm":0,"radius_mm":5,"reference":{"T2":[{"field_T":1.5,"temperature_C":20,"value_ms":50}]}}`
	def := func(name, s string) string { return f.write(t, name, []byte(s)) }
	p1 := def("p1.json", `{"format":`)
	p2 := def("p2.json", `{"format":"tauvox-phantom/2","name":"x","vials":[]}`)
	p3 := def("p3.json", `{"format":"tauvox-phantom/1","name":"x","vials":[`+vial+`,`+vial+`]}`)
	p4 := def("p4.json", `{"format":"tauvox-phantom/1","name":"x","vials":[`+strings.Replace(vial, `"radius_mm":5`, `"radius_mm":-5`, 1)+`]}`)
	p5 := def("p5.json", `{"format":"tauvox-phantom/1","name":"x","vials":[`+vial+`],"colour":1}`)
	p6 := def("p6.json", `{"format":"tauvox-phantom/1","name":"x","vials":[`+strings.Replace(vial, `"value_ms":50`, `"value_ms":-50`, 1)+`]}`)
	p7 := def("p7.json", `{"format":"tauvox-phantom/1","name":"x","vials":[{"id":"a","x_mm":0,"y_mm":0,"radius_mm":5}]}`)

	var qa map[string]any
	b, _ := os.ReadFile(f.qa)
	if err := json.Unmarshal(b, &qa); err != nil {
		t.Fatal(err)
	}
	qaWith := func(name string, edit func(q map[string]any)) string {
		var c map[string]any
		json.Unmarshal(b, &c)
		edit(c)
		out, _ := json.Marshal(c)
		return f.write(t, name, out)
	}
	session := func(q map[string]any) map[string]any { return q["session"].(map[string]any) }
	q1 := f.write(t, "q1.json", []byte("not json"))
	q2 := qaWith("q2.json", func(q map[string]any) { q["format"] = "tauvox-qa/9" })
	q3 := qaWith("q3.json", func(q map[string]any) { session(q)["date"] = "2026-13-45" })
	q4 := qaWith("q4.json", func(q map[string]any) { q["vials"] = []any{} })
	q5 := qaWith("q5.json", func(q map[string]any) { session(q)["scanner"] = " " })
	q6 := qaWith("q6.json", func(q map[string]any) { q["vials"].([]any)[0].(map[string]any)["n"] = "many" })

	badDB := f.write(t, "bad.db", bytes.Repeat([]byte("this is not sqlite "), 200))
	dbDir := f.path("dbdir")
	os.Mkdir(dbDir, 0o755)
	newer := f.path("newer.db")
	foreign := f.path("foreign.db")
	for p, stmt := range map[string]string{newer: "PRAGMA user_version = 99", foreign: "CREATE TABLE patients (name TEXT)"} {
		db, err := sql.Open("sqlite", p)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := db.Exec(stmt); err != nil {
			t.Fatal(err)
		}
		db.Close()
	}
	chartDir := f.path("charts")
	inChart := filepath.Join(chartDir, "h.db")
	hb, _ := os.ReadFile(f.db)
	f.write(t, "charts/h.db", hb)
	exported := f.write(t, "export.csv", []byte("keep me\n"))
	exists := f.path("exists")
	f.write(t, "exists/notes.txt", []byte("a user's file\n")) // an empty folder is accepted as --out

	te := []string{"--te", "10:10:160"}
	fitNII := func(p string) []string { return append([]string{"fit", p, "--model", "t2", "--out", "OUT"}, te...) }
	fitDCM := func(p string) []string { return []string{"fit", p, "--model", "t2", "--out", "OUT"} }
	roiL := func(p string) []string { return []string{"roi", f.maps, "--rois", p, "--out", "OUT"} }
	phan := func(p string) []string {
		return []string{"phantom", f.maps, "--def", p, "--temperature", "20", "--date", "2026-05-01", "--out", "OUT"}
	}
	add := func(p string) []string { return []string{"history", "add", "--db", "OUT", p} }

	cases := []struct {
		format, name string
		args         []string
		want         []string
	}{
		// NIfTI (io/nifti)
		{"nifti", "samples cut short", fitNII(short), []string{short, "header declares 32768 bytes of samples but the file holds 16208"}},
		{"nifti", "dimension product overflows memory", fitNII(huge), []string{huge, "32767x32767x32767x32767 grid", "too large to address"}},
		{"nifti", "negative dimension", fitNII(negdim), []string{negdim, "dim[1] is -3, want at least 1"}},
		{"nifti", "unknown datatype", fitNII(dtype), []string{dtype, "datatype 9999 is not a NIfTI datatype code"}},
		{"nifti", "vox_offset beyond the file", fitNII(voxoff), []string{voxoff, "vox_offset 1000000000 is beyond the end of the file"}},
		{"nifti", "bad sizeof_hdr", fitNII(sizeof), []string{sizeof, "sizeof_hdr is 123, want 348 (NIfTI-1) or 540 (NIfTI-2)"}},
		{"nifti", "gzip stream cut short", fitNII(cutgz), []string{cutgz, "header declares 32768 bytes of samples but the decompressed stream ends after"}},
		{"nifti", "gzip magic, no gzip stream", fitNII(notgz), []string{notgz, "bad gzip stream"}},
		{"nifti", "text file named .nii", fitNII(text), []string{text, "nifti"}},
		{"nifti", "empty file", fitNII(empty), []string{empty, "nifti"}},
		{"nifti", "missing file", fitNII(f.path("nope.nii.gz")), []string{"nope.nii.gz", "no such file"}},
		// Sidecar JSON (io/sidecar)
		{"sidecar", "invalid JSON", fitDCM(sideBad), []string{"sbad.json", "invalid JSON"}},
		{"sidecar", "EchoTime is text", fitDCM(sideStr), []string{"sstr.json", "EchoTime: expected a number or a list of numbers"}},
		{"sidecar", "negative EchoTime", fitDCM(sideNeg), []string{"sneg.json", "EchoTime: -0.01 s is not a valid time"}},
		{"sidecar", "not an object", fitDCM(sideArr), []string{"sarr.json", "not a JSON object"}},
		{"sidecar", "EchoTime list too short", fitDCM(sideLen), []string{"slen.json", "EchoTime", "3 values", "16 volumes"}},
		// DICOM (io/dicom)
		{"dicom", "folder without DICOM", fitDCM(emptyDir), []string{emptyDir, "no DICOM series found"}},
		{"dicom", "an image missing from the grid", fitDCM(broken("missing")), []string{"has no image at EchoTime 30 ms (echo 3)"}},
		{"dicom", "one image of another matrix", fitDCM(broken("matrix")), []string{"matrix 5×6 (Columns×Rows) differs from 5×4"}},
		{"dicom", "pixel data cut short", fitDCM(broken("truncated")), []string{"truncated: pixel data at byte 1174 declares 40 bytes but the file ends at byte 1201"}},
		{"dicom", "uneven slice spacing", fitDCM(broken("uneven")), []string{"uneven slice spacing"}},
		{"dicom", "element length beyond the file", fitDCM(descLen), []string{descLen, "element (0008,103E) at byte", "needs 65534 bytes but the file ends"}},
		{"dicom", "pixel data length beyond the file", fitDCM(pixLen), []string{pixLen, "declares 2147483632 bytes but the file ends"}},
		{"dicom", "impossible matrix", fitDCM(matrix), []string{matrix, "impossible matrix 65535×65535 (Columns×Rows)"}},
		// Region list (roi)
		{"region list", "wrong CSV header", roiL(r1), []string{r1, `header "name,x,y,radius,space", want "name,x,y,z,radius,space"`}},
		{"region list", "coordinate not a number", roiL(r2), []string{r2, `line 2: z "abc" is not a number`}},
		{"region list", "unknown space", roiL(r3), []string{r3, `space "inch", want mm or voxel`}},
		{"region list", "duplicate name", roiL(r4), []string{r4, `region name "A" appears twice`}},
		{"region list", "unknown JSON key", roiL(r5), []string{r5, `unknown field "colour"`}},
		{"region list", "region outside the image", roiL(r6), []string{r6, `region "A" at (1000, 2000, 3000) mm holds no voxel of the image`}},
		{"region list", "header only", roiL(r7), []string{r7, "region list holds no region"}},
		{"region list", "NaN coordinate", roiL(r8), []string{r8, "coordinates and radius must be finite"}},
		{"region list", "unbalanced quote", roiL(r9), []string{r9, `extraneous or missing " in quoted-field`}},
		{"region list", "JSON cut short", roiL(r10), []string{r10, "unexpected EOF"}},
		{"region list", "zero radius", roiL(r11), []string{r11, "radius must be positive"}},
		// Phantom definition (roi/phantom)
		{"phantom definition", "JSON cut short", phan(p1), []string{p1, "phantom definition: unexpected EOF"}},
		{"phantom definition", "unknown format version", phan(p2), []string{p2, `format "tauvox-phantom/2", want "tauvox-phantom/1"`}},
		{"phantom definition", "duplicate vial id", phan(p3), []string{p3, `vial id "a" appears twice`}},
		{"phantom definition", "negative radius", phan(p4), []string{p4, "vial a: position and a positive radius are required"}},
		{"phantom definition", "unknown key", phan(p5), []string{p5, `unknown field "colour"`}},
		{"phantom definition", "negative reference value", phan(p6), []string{p6, "T2 reference row needs field_T > 0, temperature_C and value_ms > 0"}},
		{"phantom definition", "vial without reference", phan(p7), []string{p7, "vial a has no reference values"}},
		// qa.json (roi/history)
		{"qa.json", "not JSON", add(q1), []string{q1, "not a qa.json"}},
		{"qa.json", "unknown format version", add(q2), []string{q2, `format "tauvox-qa/9", this tauvox reads "tauvox-qa/1"`}},
		{"qa.json", "impossible date", add(q3), []string{q3, `session date "2026-13-45" is not a date`}},
		{"qa.json", "no vial results", add(q4), []string{q4, "no vial results"}},
		{"qa.json", "blank scanner", add(q5), []string{q5, "session has no scanner"}},
		{"qa.json", "count is text", add(q6), []string{q6, "cannot unmarshal string"}},
		// History database (roi/history)
		{"history database", "not SQLite (list)", []string{"history", "list", "--db", badDB}, []string{badDB, "not a tauvox history database or damaged"}},
		{"history database", "not SQLite (add)", []string{"history", "add", "--db", badDB, f.qa}, []string{badDB, "not a tauvox history database or damaged"}},
		{"history database", "a folder", []string{"history", "add", "--db", dbDir, f.qa}, []string{dbDir, "is a folder, not a database file"}},
		{"history database", "newer schema", []string{"history", "list", "--db", newer}, []string{newer, "schema version 99 is newer than this tauvox"}},
		{"history database", "another program's SQLite", []string{"history", "add", "--db", foreign, f.qa}, []string{foreign, "an SQLite database that is not a tauvox history"}},
		{"history database", "missing (list)", []string{"history", "list", "--db", f.path("nothere.db")}, []string{"nothere.db", "no such file"}},
		// Flags and outputs (cmd/tauvox)
		{"flags", "unknown flag", append(fitDCM(f.nii), "--colour", "red"), []string{"flag provided but not defined: -colour"}},
		{"flags", "negative --workers", append(fitDCM(f.nii), "--workers", "-1"), []string{"--workers must be positive"}},
		{"flags", "bad --memory", append(fitDCM(f.nii), "--memory", "lots"), []string{`"lots" is not a size such as 512M or 2G`}},
		{"flags", "bad --te list", append(fitDCM(f.nii), "--te", "10,abc"), []string{"-te", "abc"}},
		{"flags", "--temperature NaN", []string{"phantom", f.maps, "--def", "demo", "--temperature", "NaN", "--out", "OUT"}, []string{"-temperature: want a number"}},
		{"flags", "bad --date", []string{"phantom", f.maps, "--def", "demo", "--temperature", "20", "--date", "05/10/2026", "--out", "OUT"}, []string{`--date "05/10/2026": want YYYY-MM-DD`}},
		{"flags", "--matrix out of range", []string{"simulate", "--kind", "t2", "--matrix", "5", "--out", "OUT"}, []string{"--matrix must be 8…1024"}},
		{"flags", "unknown command", []string{"fitt"}, []string{`unknown command "fitt"`}},
		{"outputs", "existing output folder", []string{"fit", f.nii, "--model", "t2", "--out", exists}, []string{exists, "exists; use --force to replace it"}},
		{"outputs", "phantom --out inside a maps folder", []string{"phantom", f.maps, "--def", "demo", "--temperature", "20", "--date", "2026-05-01", "--out", filepath.Join(f.maps, "qa")}, []string{"--out lies inside the input folder " + f.maps}},
		{"outputs", "roi --out inside a maps folder", []string{"roi", f.maps, "--rois", r6, "--out", filepath.Join(f.maps, "stats.csv")}, []string{"--out lies inside the input folder " + f.maps}},
		{"outputs", "chart --out holds the database", []string{"history", "chart", "--db", inChart, "--out", chartDir, "--force"}, []string{chartDir, "--out contains the input " + inChart}},
		{"outputs", "export --out is the database", []string{"history", "export", "--db", f.db, "--out", f.db}, []string{"--out is the input " + f.db}},
		{"outputs", "export over an existing file", []string{"history", "export", "--db", f.db, "--out", exported}, []string{exported, "exists; use --force to replace it"}},
	}
	// The outputs' parent exists, as it would for a user; a failed command
	// must leave nothing in it.
	if err := os.Mkdir(filepath.Join(f.root, "outs"), 0o755); err != nil {
		t.Fatal(err)
	}
	seen := map[string]bool{}
	for _, c := range cases {
		if seen[c.name+c.format] {
			t.Fatalf("duplicate case %s", c.name)
		}
		seen[c.name+c.format] = true
		out := filepath.Join(f.root, "outs", strings.ReplaceAll(c.format+"-"+c.name, " ", "_"))
		args := make([]string, len(c.args))
		for i, a := range c.args {
			args[i] = strings.ReplaceAll(a, "OUT", out)
		}
		before := snapshot(t, f.root)
		code, _, stderr := tauvox(t, args...)
		if code != 2 {
			t.Errorf("%s / %s: exit %d, want 2 (%s)", c.format, c.name, code, stderr)
		}
		if strings.Count(strings.TrimRight(stderr, "\n"), "\n") != 0 || stderr == "" {
			t.Errorf("%s / %s: want one line, got %q", c.format, c.name, stderr)
		}
		for _, w := range c.want {
			if !strings.Contains(stderr, w) {
				t.Errorf("%s / %s: %q lacks %q", c.format, c.name, stderr, w)
			}
		}
		if d := diffSnapshots(before, snapshot(t, f.root)); len(d) > 0 {
			t.Errorf("%s / %s: files changed: %v", c.format, c.name, d)
		}
		if testing.Verbose() {
			t.Logf("%-18s | %-36s | %s", c.format, c.name, strings.TrimSpace(strings.ReplaceAll(stderr, f.root, "…")))
		}
	}
	if len(cases) < 25 {
		t.Errorf("catalogue holds %d entries, want at least 25", len(cases))
	}
}

// TestFitOutputInsideInput: tauvox fit DIR --out DIR/maps for a DICOM
// folder must be refused (the next scan of DIR would find the maps), as
// must an --out that contains the series (checkOutput at the top of
// fitSeries).
func TestFitOutputInsideInput(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "sim")
	if code, _, e := tauvox(t, "simulate", "--kind", "t2", "--format", "dicom", "--out", dir, "--matrix", "16", "--slices", "1"); code != 0 {
		t.Fatal(e)
	}
	dcm := filepath.Join(dir, "t2")
	out := filepath.Join(dcm, "maps")
	code, _, stderr := tauvox(t, "fit", dcm, "--model", "t2", "--out", out, "--quiet")
	if code != 2 || !strings.Contains(stderr, "--out lies inside the input folder "+dcm) {
		t.Errorf("exit %d: %s", code, stderr)
	}
	if _, err := os.Stat(out); err == nil {
		t.Error("maps written inside the input folder")
	}
	code, _, stderr = tauvox(t, "fit", dcm, "--model", "t2", "--out", dir, "--force", "--quiet")
	if code != 2 || !strings.Contains(stderr, "--out contains the input "+dcm) {
		t.Errorf("--out holding the series: exit %d: %s", code, stderr)
	}
	if _, err := os.Stat(dcm); err != nil {
		t.Errorf("the input series is gone: %v", err)
	}
}
