package dicom

import (
	"compress/gzip"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// realWorld copies the committed real-world files of dir (gunzipping
// *.gz) into a temporary folder and returns it.
func realWorld(t *testing.T, dir string) string {
	t.Helper()
	out := t.TempDir()
	files, _ := filepath.Glob(filepath.Join(testdata, dir, "*"))
	if len(files) == 0 {
		t.Fatalf("no files in testdata/dicom/%s", dir)
	}
	for _, f := range files {
		if filepath.Ext(f) == ".md" {
			continue
		}
		in, err := os.Open(f)
		if err != nil {
			t.Fatal(err)
		}
		var r io.Reader = in
		name := filepath.Base(f)
		if strings.HasSuffix(name, ".gz") {
			zr, err := gzip.NewReader(in)
			if err != nil {
				t.Fatal(err)
			}
			r, name = zr, strings.TrimSuffix(name, ".gz")
		}
		b, err := io.ReadAll(r)
		in.Close()
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(out, name), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return out
}

// TestRealWorldFiles: the DICOM test files Debian's python3-pydicom
// (2.3.1) and python3-nibabel (5.0.0) ship (a selection committed under
// testdata/dicom/pydicom and testdata/dicom/nibabel, see their
// README.md; the whole installed pydicom set too when present) scan and
// load without a panic: every file is a series, a problem with a reason,
// skipped or left out, and every load either succeeds or returns an error
// of one line that starts with a path. The nibabel mosaics (ImageType
// MOSAIC, 48 slices in one frame) are refused as mosaics, never loaded as
// one slice.
func TestRealWorldFiles(t *testing.T) {
	dirs := []string{realWorld(t, "pydicom"), realWorld(t, "nibabel")}
	const installed = "/usr/lib/python3/dist-packages/pydicom/data/test_files"
	if _, err := os.Stat(installed); err == nil {
		dirs = append(dirs, installed)
	} else {
		t.Logf("python3-pydicom not installed; only the committed selection is scanned")
	}
	for _, dir := range dirs {
		c, err := Scan([]string{dir}, &ScanOptions{Derived: true, Localizers: true})
		if err != nil {
			t.Fatal(err)
		}
		loaded, refused := 0, 0
		for _, s := range c.Series {
			im, err := LoadSeries(s)
			if err != nil {
				refused++
				if strings.ContainsAny(err.Error(), "\r\n") || !strings.HasPrefix(err.Error(), "/") && !strings.HasPrefix(err.Error(), ".") {
					t.Errorf("error not one line starting with a path: %q", err)
				}
				continue
			}
			loaded++
			if im.Voxels() == 0 {
				t.Errorf("%s: empty image", s.ID)
			}
		}
		t.Logf("%s: %d files read, %d skipped, %d unreadable, %d left out; %d series loaded, %d refused",
			dir, c.Files, c.Skipped, c.Unreadable, c.Ignored, loaded, refused)
	}
	c, err := Scan([]string{dirs[1]}, &ScanOptions{Derived: true})
	if err != nil {
		t.Fatal(err)
	}
	mosaics := 0
	for _, s := range c.Series {
		if s.Description != "CBU_DTI_64D_1A" {
			continue
		}
		mosaics++
		if _, err := LoadSeries(s); err == nil || !strings.Contains(err.Error(), "mosaic (ImageType MOSAIC, 48 slices tiled in one") {
			t.Errorf("mosaic series %s: %v", s.ID, err)
		}
	}
	if mosaics != 2 {
		t.Errorf("%d mosaic series, want 2 (0.dcm and the two diffusion files)", mosaics)
	}
}

// TestMosaicBySize: without MOSAIC in ImageType, a frame at least twice
// the AcquisitionMatrix (0018,1310) with the vendor's
// NumberOfImagesInMosaic (0019,100A) is a mosaic and refused, naming the
// file and the count; the same frame without the count is an ordinary
// image.
func TestMosaicBySize(t *testing.T) {
	for _, withCount := range []bool{true, false} {
		data := fileWith(tsExplicitLE, func(d *dataset) {
			d.drop(0x00280010)
			d.drop(0x00280011)
			d.us(0x00280010, 4)
			d.us(0x00280011, 4)
			d.drop(0x7FE00010)
			d.put(0x7FE00010, "OW", make([]byte, 32))
			d.put(0x00181310, "US", []byte{2, 0, 0, 0, 0, 0, 2, 0}) // AcquisitionMatrix 2\0\0\2
			if withCount {
				d.us(0x0019100A, 4)
			}
		})
		dir := t.TempDir()
		path := filepath.Join(dir, "m.dcm")
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		c, err := Scan([]string{dir}, nil)
		if err != nil || len(c.Series) != 1 {
			t.Fatalf("scan: %v %d series %v", err, len(c.Series), c.Problems)
		}
		_, err = LoadSeries(c.Series[0])
		switch {
		case withCount && (err == nil || !strings.Contains(err.Error(), "mosaic (a 4×4 frame for an acquisition matrix of 2 with 4 slices in NumberOfImagesInMosaic (0019,100A))") || !strings.HasPrefix(err.Error(), path)):
			t.Errorf("with the count: %v", err)
		case !withCount && err != nil:
			t.Errorf("without the count: %v", err)
		}
	}
}
