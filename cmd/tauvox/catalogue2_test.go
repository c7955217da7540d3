package main

import (
	"database/sql"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/roi/phantom"
	"github.com/tauvox/tauvox/volume"
)

// withDeadline runs a tauvox command in-process and fails the test, rather
// than hanging it, when the command does not return within d: every case
// below blocked for ever before inputs were opened without blocking
// (internal/regular).
func withDeadline(t *testing.T, d time.Duration, args ...string) (int, string, string) {
	t.Helper()
	type res struct {
		code   int
		so, se string
	}
	done := make(chan res, 1)
	go func() {
		c, so, se := tauvox(t, args...)
		done <- res{c, so, se}
	}()
	select {
	case r := <-done:
		return r.code, r.so, r.se
	case <-time.After(d):
		t.Fatalf("tauvox %s: still running after %v (blocked on a FIFO?)", strings.Join(args, " "), d)
	}
	return 0, "", ""
}

// TestNonRegularInputs: a named pipe (FIFO) where tauvox expects a file —
// the NIfTI input, its sidecar, a file inside a scanned DICOM folder or a
// BIDS dataset, the history database, a qa.json, a phantom definition, a
// region list — never blocks (opening a FIFO with no writer waits for one:
// POSIX open(2)). A named input is refused with exit 2 and one line naming
// it; a FIFO met while walking a folder is skipped with a note. Nothing is
// written.
func TestNonRegularInputs(t *testing.T) {
	f := newFixtures(t)
	mkfifo := func(p string) string {
		t.Helper()
		os.MkdirAll(filepath.Dir(p), 0o755)
		if err := syscall.Mkfifo(p, 0o644); err != nil {
			t.Skip("no FIFOs here:", err)
		}
		return p
	}
	niiFIFO := mkfifo(f.path("pipe/t2.nii.gz"))
	// The sidecar is the FIFO, the image a real series.
	z, _ := os.ReadFile(f.nii)
	sideImg := f.write(t, "sidepipe/t2.nii.gz", z)
	sideFIFO := mkfifo(f.path("sidepipe/t2.json"))
	// A DICOM folder holding the series and a FIFO.
	dcm := copyTree(t, f.dcm)
	dcmFIFO := mkfifo(filepath.Join(dcm, "zz-pipe.dcm"))
	// A BIDS dataset with a FIFO as one subject's image.
	bids := copyTree(t, filepath.Join("..", "..", "testdata", "bids"))
	imgs, _ := filepath.Glob(filepath.Join(bids, "sub-02", "ses-1", "anat", "*.nii.gz"))
	if len(imgs) == 0 {
		t.Fatal("no sub-02 image in the committed BIDS dataset")
	}
	os.Remove(imgs[0])
	bidsFIFO := mkfifo(imgs[0])
	dbFIFO := mkfifo(f.path("db.pipe"))
	qaFIFO := mkfifo(f.path("qa.pipe"))
	defFIFO := mkfifo(f.path("def.pipe"))
	roiFIFO := mkfifo(f.path("rois.pipe"))
	outs := f.path("outs")
	os.Mkdir(outs, 0o755)

	cases := []struct {
		name string
		args []string
		want []string
	}{
		{"NIfTI input", []string{"fit", niiFIFO, "--model", "t2", "--te", "10:10:160", "--out", "OUT"}, []string{niiFIFO, "is a named pipe (FIFO), not a NIfTI file"}},
		{"sidecar", []string{"fit", sideImg, "--model", "t2", "--out", "OUT"}, []string{sideFIFO, "is a named pipe (FIFO), not a sidecar file"}},
		{"history --db (add)", []string{"history", "add", "--db", dbFIFO, f.qa}, []string{dbFIFO, "is a named pipe (FIFO), not a regular file"}},
		{"history --db (list)", []string{"history", "list", "--db", dbFIFO}, []string{dbFIFO, "is a named pipe (FIFO), not a regular file"}},
		{"qa.json", []string{"history", "add", "--db", "OUT", qaFIFO}, []string{qaFIFO, "is a named pipe (FIFO), not a regular file"}},
		{"phantom definition", []string{"phantom", f.maps, "--def", defFIFO, "--temperature", "20", "--date", "2026-05-01", "--out", "OUT"}, []string{defFIFO, "is a named pipe (FIFO), not a regular file"}},
		{"region list", []string{"roi", f.maps, "--rois", roiFIFO, "--out", "OUT"}, []string{roiFIFO, "is a named pipe (FIFO), not a regular file"}},
	}
	for _, c := range cases {
		refused(t, f, outs, 20*time.Second, c.name, c.args, c.want)
	}

	// A FIFO as one subject's image in a BIDS dataset: batch fails that
	// series by name (exit 1, as for any failed series) and fits the others.
	var stdout string
	code, _, stderr := withDeadline(t, 60*time.Second, "batch", bids, "--out", filepath.Join(outs, "bids"), "--quiet")
	if code != 1 || !strings.Contains(stderr, bidsFIFO[len(bids):]) || !strings.Contains(stderr, "is a named pipe (FIFO), not a NIfTI file") ||
		!strings.Contains(stderr, "1 of 3 series failed") {
		t.Errorf("batch with a FIFO: exit %d: %s", code, stderr)
	}

	// A FIFO inside a DICOM folder: scan notes it and goes on; fit fits
	// the series beside it.
	code, stdout, stderr = withDeadline(t, 20*time.Second, "scan", dcm)
	if code != 0 || !strings.Contains(stdout, dcmFIFO) || !strings.Contains(stdout, "is a named pipe (FIFO), not a regular file") {
		t.Errorf("scan with a FIFO: exit %d\n%s%s", code, stdout, stderr)
	}
	code, _, stderr = withDeadline(t, 60*time.Second, "fit", dcm, "--model", "t2", "--out", filepath.Join(outs, "dcm"), "--quiet", "--no-preview")
	if code != 0 {
		t.Errorf("fit of a DICOM folder holding a FIFO: exit %d: %s", code, stderr)
	}
}

// TestSecondCatalogue holds the cases of the second bad-input catalogue
// (docs/robustness.md) that are not about special files: each gives exit
// code 2, one line naming the file and the problem, and changes nothing.
func TestSecondCatalogue(t *testing.T) {
	f := newFixtures(t)
	// RescaleSlope (0028,1053) is DS: text in a 2-byte-length explicit-VR
	// element (PS3.5 §7.1.2). The simulator writes a slope per image; its
	// digits are overwritten in place (padding with spaces keeps the length).
	slope := func(v string) func(t *testing.T, b []byte) {
		return func(t *testing.T, b []byte) {
			i := dicomElement(t, b, 0x0028, 0x1053, "DS")
			n := int(binary.LittleEndian.Uint16(b[i+6:]))
			if len(v) > n {
				t.Fatalf("slope %q longer than the element (%d bytes)", v, n)
			}
			copy(b[i+8:i+8+n], v+strings.Repeat(" ", n-len(v)))
		}
	}
	zero := f.dicomWith(t, "d_slope0", slope("0"))
	nan := f.dicomWith(t, "d_slopenan", slope("NaN"))
	negVer := f.path("negver.db")
	db, err := sql.Open("sqlite", negVer)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := db.Exec("PRAGMA user_version = -1"); err != nil {
		t.Fatal(err)
	}
	db.Close()
	// A label image on the maps' grid holding one label above 2^24, and a
	// region list of 100,000 spheres each covering the whole image.
	bigLabel := f.path("labels.nii.gz")
	if code, _, e := tauvox(t, "simulate", "--kind", "t2", "--out", f.path("labsim"), "--matrix", "32", "--slices", "2"); code != 0 {
		t.Fatal(e)
	}
	// Maps of 32×32×2 voxels: 100,000 spheres over all of them hold 204.8
	// million voxel indices, three times roi.MaxRegionVoxels.
	bigMaps := f.path("bigmaps")
	if code, _, e := tauvox(t, "fit", filepath.Join(f.path("labsim"), "t2.nii.gz"), "--model", "t2", "--out", bigMaps, "--quiet", "--no-preview"); code != 0 {
		t.Fatal(e)
	}
	ser, err := nifti.Read(filepath.Join(f.path("labsim"), "t2.nii.gz"))
	if err != nil {
		t.Fatal(err)
	}
	lab := volume.New(ser.Dims[0], ser.Dims[1], ser.Dims[2], 1)
	lab.Affine = ser.Affine
	lab.Data[5] = 1<<24 + 2
	if err := nifti.Write(bigLabel, lab, nil); err != nil {
		t.Fatal(err)
	}
	var sb strings.Builder
	sb.WriteString("name,x,y,z,radius,space\n")
	for i := 0; i < 100000; i++ {
		fmt.Fprintf(&sb, "s%d,16,16,1,1000,voxel\n", i)
	}
	manySpheres := f.write(t, "spheres.csv", []byte(sb.String()))
	// qa.json files that decode but are no phantom measurement.
	qb, err := os.ReadFile(f.qa)
	if err != nil {
		t.Fatal(err)
	}
	qaWith := func(name string, edit func(q map[string]any)) string {
		var c map[string]any
		if err := json.Unmarshal(qb, &c); err != nil {
			t.Fatal(err)
		}
		edit(c)
		out, _ := json.Marshal(c)
		return f.write(t, name, out)
	}
	sess := func(q map[string]any) map[string]any { return q["session"].(map[string]any) }
	vial0 := func(q map[string]any) map[string]any { return q["vials"].([]any)[0].(map[string]any) }
	qNeg := qaWith("q_neg.json", func(q map[string]any) { vial0(q)["n"] = -5 })
	qTime := qaWith("q_time.json", func(q map[string]any) { sess(q)["time"] = "25:61" })
	qCold := qaWith("q_cold.json", func(q map[string]any) { sess(q)["temperature_C"] = -300 })
	qVerdict := qaWith("q_verdict.json", func(q map[string]any) { vial0(q)["verdict"] = "PASS!!" })
	qT3 := qaWith("q_t3.json", func(q map[string]any) { vial0(q)["quantity"] = "T3" })
	qNoMedian := qaWith("q_nomedian.json", func(q map[string]any) { vial0(q)["verdict"] = "pass"; delete(vial0(q), "median_ms") })
	qNoID := qaWith("q_noid.json", func(q map[string]any) { delete(vial0(q), "id") })
	qHuge := qaWith("q_huge.json", func(q map[string]any) { vial0(q)["median_ms"] = 1e308 })
	// 150,000 vial results, written as text (building them as maps and
	// marshalling them is slow under the race detector).
	var many strings.Builder
	many.WriteString(`{"format":"tauvox-qa/1","session":{"scanner":"S","date":"2026-05-01","field_T":1.5,"temperature_C":20,"phantom":"p"},"verdict":"pass","vials":[`)
	for i := 0; i < 150000; i++ {
		if i > 0 {
			many.WriteByte(',')
		}
		fmt.Fprintf(&many, `{"id":"V%d","quantity":"T1","n":1,"median_ms":100,"reference_ms":100,"deviation_pct":0,"tolerance_ms":5,"verdict":"pass"}`, i)
	}
	many.WriteString("]}")
	qMany := f.write(t, "q_many.json", []byte(many.String()))
	qUnd := qaWith("q_und.json", func(q map[string]any) {
		q["verdict"] = "undetermined"
		for _, v := range q["vials"].([]any) {
			v.(map[string]any)["verdict"] = "undetermined"
		}
	})
	add := func(p string) []string { return []string{"history", "add", "--db", "OUT", p} }
	cases := []struct {
		name string
		args []string
		want []string
	}{
		{"qa.json n = -5", add(qNeg), []string{qNeg, "n is -5, want ≥ 0"}},
		{"qa.json time 25:61", add(qTime), []string{qTime, `session time "25:61" is not a time of day (HH:MM)`}},
		{"qa.json -300 °C", add(qCold), []string{qCold, "session temperature_C -300 is outside -10…60 °C"}},
		{"qa.json verdict PASS!!", add(qVerdict), []string{qVerdict, `verdict "PASS!!" is not one of`}},
		{"qa.json quantity T3", add(qT3), []string{qT3, `quantity "T3" is not one of T1, T2`}},
		{"qa.json missing median", add(qNoMedian), []string{qNoMedian, "verdict pass without median_ms"}},
		{"qa.json missing vial id", add(qNoID), []string{qNoID, "vials[0]: no vial id"}},
		{"qa.json median 1e308", add(qHuge), []string{qHuge, "median_ms 1e+308 is outside [0, 100000]"}},
		{"qa.json 150,000 vials", add(qMany), []string{qMany, "150000 vial results, above the limit of 1000 per session"}},
		{"qa.json undetermined session", add(qUnd), []string{qUnd, "could not be told apart (verdict undetermined)"}},
		{"RescaleSlope 0", []string{"fit", zero, "--model", "t2", "--out", "OUT"}, []string{"RescaleSlope (0028,1053) is 0"}},
		{"RescaleSlope NaN", []string{"fit", nan, "--model", "t2", "--out", "OUT"}, []string{"RescaleSlope (0028,1053) is NaN"}},
		{"schema version -1 (add)", []string{"history", "add", "--db", negVer, f.qa}, []string{negVer, "schema version -1 is not one tauvox writes"}},
		{"schema version -1 (list)", []string{"history", "list", "--db", negVer}, []string{negVer, "schema version -1 is not one tauvox writes"}},
		{"--workers 100000000 (fit)", []string{"fit", f.nii, "--model", "t2", "--workers", "100000000", "--out", "OUT"}, []string{"--workers 100000000 is above the limit of", "per CPU"}},
		{"--workers 100000000 (batch)", []string{"batch", filepath.Join("..", "..", "testdata", "bids"), "--workers", "100000000", "--out", "OUT"}, []string{"--workers 100000000 is above the limit of"}},
		{"simulate 1024×1024×256", []string{"simulate", "--kind", "t2", "--matrix", "1024", "--slices", "256", "--out", "OUT"}, []string{"a 1024×1024×256 series of 16 volumes needs 16.0 GiB in memory", "above the limit of 2.0 GiB"}},
		{"label value above 2^24", []string{"roi", bigMaps, "--rois", bigLabel, "--out", "OUT"}, []string{bigLabel, "is above 16777216"}},
		{"many large spheres", []string{"roi", bigMaps, "--rois", manySpheres, "--out", "OUT"}, []string{manySpheres, "voxels in all", "the limit"}},
	}
	outs := f.path("outs")
	os.Mkdir(outs, 0o755)
	for _, c := range cases {
		refused(t, f, outs, 60*time.Second, c.name, c.args, c.want)
	}
}

// refused runs one catalogue case: OUT in args becomes a fresh path under
// outs; the command must end within d with exit code 2 and one line on
// stderr holding every want, and leave every file under f.root as it was.
func refused(t *testing.T, f *fixtures, outs string, d time.Duration, name string, args, want []string) {
	t.Helper()
	out := filepath.Join(outs, strings.ReplaceAll(name, " ", "_"))
	a := make([]string, len(args))
	for i, s := range args {
		a[i] = strings.ReplaceAll(s, "OUT", out)
	}
	before := snapshot(t, f.root)
	code, _, stderr := withDeadline(t, d, a...)
	if code != 2 || strings.Count(strings.TrimRight(stderr, "\n"), "\n") != 0 {
		t.Errorf("%s: exit %d, want 2 and one line: %q", name, code, stderr)
	}
	for _, w := range want {
		if !strings.Contains(stderr, w) {
			t.Errorf("%s: %q lacks %q", name, stderr, w)
		}
	}
	if d := diffSnapshots(before, snapshot(t, f.root)); len(d) > 0 {
		t.Errorf("%s: files changed: %v", name, d)
	}
	if testing.Verbose() {
		t.Logf("%-26s | %s", name, strings.TrimSpace(strings.ReplaceAll(stderr, f.root, "…")))
	}
}

// TestOutputAlias: an --out that reaches the input's folder by another
// path — a symbolic link, or a bind mount (when this process may mount:
// root in a mount namespace that allows it) — is refused by file identity
// (device and inode), so --force cannot replace the folder holding the
// input; the input survives a full fit command.
func TestOutputAlias(t *testing.T) {
	f := newFixtures(t)
	in := filepath.Join(f.root, "in")
	z, _ := os.ReadFile(f.nii)
	series := f.write(t, "in/t2.nii.gz", z)
	f.write(t, "in/t2.json", []byte(`{"EchoTime": [0.01,0.02,0.03,0.04,0.05,0.06,0.07,0.08,0.09,0.1,0.11,0.12,0.13,0.14,0.15,0.16]}`))
	link := filepath.Join(f.root, "link")
	if err := os.Symlink(in, link); err != nil {
		t.Fatal(err)
	}
	aliases := []string{link}
	bind := filepath.Join(f.root, "bind")
	os.Mkdir(bind, 0o755)
	if err := syscall.Mount(in, bind, "", syscall.MS_BIND, ""); err == nil {
		defer syscall.Unmount(bind, 0)
		aliases = append(aliases, bind)
	} else {
		t.Logf("bind mount not possible here (%v): checked through the symbolic link only", err)
	}
	for _, a := range aliases {
		code, _, stderr := tauvox(t, "fit", series, "--model", "t2", "--out", a, "--force", "--quiet")
		if code != 2 || !strings.Contains(stderr, "--out contains the input "+series) {
			t.Errorf("--out %s: exit %d: %s", a, code, stderr)
		}
		if _, err := os.Stat(series); err != nil {
			t.Fatalf("--out %s: the input is gone", a)
		}
	}
}

// TestOutputAppearsMidRun: a folder created at --out while fit runs (a
// second fit to the same --out, a user's mkdir) is not replaced: fit ends
// with exit 2 and one line naming the folder, and the folder keeps what
// was put there. The folder is made by a goroutine as soon as fit's
// temporary folder appears.
func TestOutputAppearsMidRun(t *testing.T) {
	f := newFixtures(t)
	out := f.path("race")
	done := make(chan struct{})
	go func() {
		defer close(done)
		for i := 0; i < 20000; i++ {
			if m, _ := filepath.Glob(filepath.Join(f.root, ".race.tmp-*")); len(m) > 0 {
				os.Mkdir(out, 0o755)
				os.WriteFile(filepath.Join(out, "mine.txt"), []byte("user data"), 0o644)
				return
			}
			time.Sleep(100 * time.Microsecond)
		}
	}()
	code, _, stderr := withDeadline(t, 60*time.Second, "fit", f.nii, "--model", "t2", "--method", "nlls", "--out", out, "--quiet")
	<-done
	b, err := os.ReadFile(filepath.Join(out, "mine.txt"))
	if err != nil || string(b) != "user data" {
		t.Fatalf("the folder made during the run lost its file (%v); fit exit %d: %s", err, code, stderr)
	}
	if code != 2 || !strings.Contains(stderr, out+": changed during the run (a folder appeared there)") || strings.Count(strings.TrimRight(stderr, "\n"), "\n") != 0 {
		t.Errorf("exit %d: %q", code, stderr)
	}
	if m, _ := filepath.Glob(filepath.Join(f.root, ".race.*")); len(m) > 0 {
		t.Errorf("left %v", m)
	}
}

// TestEmptyOutputAccepted: an existing empty folder (made by the user in
// advance, or by a cluster job script) is accepted as --out without
// --force and filled.
func TestEmptyOutputAccepted(t *testing.T) {
	f := newFixtures(t)
	out := f.path("ready")
	os.Mkdir(out, 0o755)
	if code, _, stderr := tauvox(t, "fit", f.nii, "--model", "t2", "--out", out, "--quiet", "--no-preview"); code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if _, err := os.Stat(filepath.Join(out, "T2map.nii.gz")); err != nil {
		t.Error(err)
	}
}

// TestHistoryReadersLeaveNothing: history list, export and chart leave no
// -wal or -shm file beside the database (they open it allowing no change,
// so the last connection folds the log back and removes them), nor does the
// demo in its output folder.
func TestHistoryReadersLeaveNothing(t *testing.T) {
	f := newFixtures(t)
	for _, args := range [][]string{
		{"history", "list", "--db", f.db},
		{"history", "export", "--db", f.db, "--out", f.path("e.csv")},
		{"history", "chart", "--db", f.db, "--out", f.path("charts")},
	} {
		if code, _, e := tauvox(t, args...); code > 1 {
			t.Fatalf("%v: exit %d: %s", args, code, e)
		}
		for _, ext := range []string{"-wal", "-shm"} {
			if _, err := os.Stat(f.db + ext); err == nil {
				t.Errorf("%v left %s", args, filepath.Base(f.db+ext))
			}
		}
	}
	out := f.path("demo")
	if code, _, e := tauvox(t, "demo", "--out", out, "--sessions", "3"); code > 1 {
		t.Fatalf("demo: exit %d: %s", code, e)
	}
	if m, _ := filepath.Glob(filepath.Join(out, "*-[ws][ah][lm]")); len(m) > 0 {
		t.Errorf("demo left %v", m)
	}
}

// TestNoEscapesToTerminal: escape sequences in a qa.json's scanner,
// phantom, vial id and tool version (text from files) reach the terminal
// through no history command: history add, list and chart print them
// through printable (U+FFFD for control characters).
func TestNoEscapesToTerminal(t *testing.T) {
	f := newFixtures(t)
	b, _ := os.ReadFile(f.qa)
	var q map[string]any
	if err := json.Unmarshal(b, &q); err != nil {
		t.Fatal(err)
	}
	const esc = "\x1b]0;owned\x07\x1b[2J"
	q["session"].(map[string]any)["scanner"] = "MR" + esc
	q["session"].(map[string]any)["phantom"] = "P" + esc
	q["tool"].(map[string]any)["version"] = "v" + esc
	for _, v := range q["vials"].([]any) {
		m := v.(map[string]any)
		m["id"] = m["id"].(string) + esc
	}
	out, _ := json.Marshal(q)
	hostile := f.write(t, "hostile.json", out)
	db := f.path("hostile.db")
	for _, args := range [][]string{
		{"history", "add", "--db", db, hostile},
		{"history", "list", "--db", db},
		{"history", "chart", "--db", db, "--out", f.path("hc")},
	} {
		code, stdout, stderr := tauvox(t, args...)
		if code > 1 {
			t.Fatalf("%v: exit %d: %s", args, code, stderr)
		}
		if strings.ContainsAny(stdout+stderr, "\x1b\x07") {
			t.Errorf("%v: an escape reached the output: %q", args, stdout+stderr)
		}
	}
}

// TestNoInventedNumbers: through the command line, a series of zeros gets
// no voxel with status ok (was T2 = 81 ms "ok"), with the automatic mask
// and with --no-mask; a B1 map whose voxels are 0 or −1 gives those voxels
// status bad-b1 (was fitted as B1 = 1) while the others fit.
func TestNoInventedNumbers(t *testing.T) {
	dir := t.TempDir()
	sim := filepath.Join(dir, "sim")
	if code, _, e := tauvox(t, "simulate", "--kind", "t2", "--out", sim, "--matrix", "16", "--slices", "1"); code != 0 {
		t.Fatal(e)
	}
	im, err := nifti.Read(filepath.Join(sim, "t2.nii.gz"))
	if err != nil {
		t.Fatal(err)
	}
	for i := range im.Data {
		im.Data[i] = 0
	}
	zero := filepath.Join(dir, "zero.nii.gz")
	if err := nifti.Write(zero, im, nil); err != nil {
		t.Fatal(err)
	}
	side, _ := os.ReadFile(filepath.Join(sim, "t2.json"))
	os.WriteFile(filepath.Join(dir, "zero.json"), side, 0o644)
	for i, extra := range [][]string{nil, {"--no-mask"}} {
		out := filepath.Join(dir, "zmaps"+strconv.Itoa(i))
		args := append([]string{"fit", zero, "--model", "t2", "--out", out, "--quiet", "--no-preview"}, extra...)
		if code, _, e := tauvox(t, args...); code != 0 {
			t.Fatalf("%v: exit %d: %s", extra, code, e)
		}
		st, err := nifti.Read(filepath.Join(out, "status.nii.gz"))
		if err != nil {
			t.Fatal(err)
		}
		for v, s := range st.Data {
			if s == float32(fit.OK) {
				t.Fatalf("%v: voxel %d of a series of zeros has status ok", extra, v)
			}
		}
	}

	// t1-vfa with a B1 map: one voxel 0, one −1, the rest 1.
	vsim := filepath.Join(dir, "vsim")
	if code, _, e := tauvox(t, "simulate", "--kind", "t1-vfa", "--out", vsim, "--matrix", "16", "--slices", "1"); code != 0 {
		t.Fatal(e)
	}
	ser, err := nifti.Read(filepath.Join(vsim, "t1-vfa.nii.gz"))
	if err != nil {
		t.Fatal(err)
	}
	b1 := volume.New(ser.Dims[0], ser.Dims[1], ser.Dims[2], 1)
	b1.Affine = ser.Affine
	for i := range b1.Data {
		b1.Data[i] = 1
	}
	c := 8 + 16*8 // a voxel of the phantom's body
	b1.Data[c], b1.Data[c+1] = 0, -1
	b1Path := filepath.Join(dir, "b1.nii.gz")
	if err := nifti.Write(b1Path, b1, nil); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "vmaps")
	if code, _, e := tauvox(t, "fit", filepath.Join(vsim, "t1-vfa.nii.gz"), "--model", "t1-vfa", "--b1", b1Path, "--no-mask", "--out", out, "--quiet", "--no-preview"); code != 0 {
		t.Fatalf("exit %d: %s", code, e)
	}
	st, err := nifti.Read(filepath.Join(out, "status.nii.gz"))
	if err != nil {
		t.Fatal(err)
	}
	for _, v := range []int{c, c + 1} {
		if st.Data[v] != float32(fit.BadB1) {
			t.Errorf("voxel %d (B1 %v): status %v, want bad-b1", v, b1.Data[v], st.Data[v])
		}
	}
	if st.Data[c+2] == float32(fit.BadB1) {
		t.Error("a voxel with B1 = 1 has status bad-b1")
	}
}

// TestPhantomNoEscapes: escape sequences in a phantom definition's name
// and vial ids do not reach the terminal through tauvox phantom.
func TestPhantomNoEscapes(t *testing.T) {
	f := newFixtures(t)
	def := phantom.Demo()
	const esc = "\x1b]0;owned\x07\x1b[2J"
	def.Name += esc
	for i := range def.Vials {
		def.Vials[i].ID += esc
	}
	b, err := json.Marshal(def)
	if err != nil {
		t.Fatal(err)
	}
	p := f.write(t, "hostile-def.json", b)
	code, stdout, stderr := tauvox(t, "phantom", f.path("qmaps"), "--def", p, "--temperature", "20", "--date", "2026-05-01", "--out", f.path("hqa"))
	if code > 1 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if !strings.Contains(stdout, "vial") {
		t.Fatalf("no verdict table: %q", stdout)
	}
	if strings.ContainsAny(stdout+stderr, "\x1b\x07") {
		t.Errorf("an escape reached the output: %q", stdout+stderr)
	}
}
