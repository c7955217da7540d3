package output

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestCheckOutput: the output check refuses an output that is, lies in,
// or contains an input, through "..", relative paths and symbolic links,
// and lets an output beside an input file pass.
func TestCheckOutput(t *testing.T) {
	dir := t.TempDir()
	dcm := filepath.Join(dir, "dicom")
	os.MkdirAll(filepath.Join(dcm, "sub"), 0o755)
	nii := filepath.Join(dir, "a.nii.gz")
	os.WriteFile(nii, []byte("x"), 0o644)
	link := filepath.Join(dir, "link")
	if err := os.Symlink(dcm, link); err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		out, in, want string
	}{
		{filepath.Join(dcm, "maps"), dcm, "lies inside the input folder"},
		{filepath.Join(dcm, "sub", "deeper", "maps"), dcm, "lies inside the input folder"},
		{filepath.Join(link, "maps"), dcm, "lies inside the input folder"},
		{filepath.Join(dir, "x", "..", "dicom", "maps"), dcm, "lies inside the input folder"},
		{dcm, dcm, "--out is the input"},
		{dcm + string(filepath.Separator), link, "--out is the input"},
		{nii, nii, "--out is the input"},
		{dir, nii, "--out contains the input"},
		{dir, dcm, "--out contains the input"},
		{filepath.Join(dir, "maps"), nii, ""},
		{filepath.Join(dir, "dicom-maps"), dcm, ""},
		{filepath.Join(dir, "maps"), "", ""},
		{filepath.Join(dir, "maps"), "demo", ""},
	}
	for _, c := range cases {
		err := Check(c.out, c.in)
		switch {
		case c.want == "" && err != nil:
			t.Errorf("out %s, in %s: %v", c.out, c.in, err)
		case c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)):
			t.Errorf("out %s, in %s: %v, want …%s", c.out, c.in, err, c.want)
		}
	}
	// Relative paths, from inside the folder.
	wd, _ := os.Getwd()
	defer os.Chdir(wd)
	os.Chdir(dcm)
	if err := Check("maps", "."); err == nil {
		t.Error("relative: maps inside . was accepted")
	}
}
