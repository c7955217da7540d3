package pipeline

import (
	"errors"
	"fmt"
	"os"
	"strings"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/volume"
)

// Convert is one `tauvox convert`: a series or protocol that fit can read
// (a DICOM folder or file, a joined protocol, or a NIfTI file with its
// sidecar), written as one 4-D NIfTI with a BIDS sidecar (times in
// seconds). It reads through series.Load, so the grid and affine are the
// ones fit uses.
type Convert struct {
	// Series is the input path; Overrides choose a DICOM series or
	// protocol (--series), read derived images, or replace parameters.
	Series    string
	Overrides series.Overrides
	// Out is the NIfTI file to write (.nii or .nii.gz); its sidecar is
	// Out with .json. Force replaces existing files.
	Out     string
	Force   bool
	Version string
}

// Run reads the series and writes Out and its sidecar. Nothing is left
// behind on error: the NIfTI file is written under a temporary name and
// renamed, and removed again when the sidecar cannot be written.
func (c *Convert) Run() (*volume.Image, error) {
	if !strings.HasSuffix(c.Out, ".nii") && !strings.HasSuffix(c.Out, ".nii.gz") {
		return nil, fmt.Errorf("%s: --out must end in .nii or .nii.gz", c.Out)
	}
	side := series.SidecarName(c.Out)
	for _, p := range []string{c.Out, side} {
		if _, err := os.Lstat(p); err == nil && !c.Force {
			return nil, fmt.Errorf("%s: exists; --force replaces it", p)
		} else if err != nil && !errors.Is(err, os.ErrNotExist) {
			return nil, err
		}
	}
	for _, p := range []string{c.Out, side} {
		if err := output.Check(p, c.Series); err != nil {
			return nil, err
		}
	}
	o := c.Overrides
	im, _, err := series.Load(c.Series, &o)
	if err != nil {
		return nil, err
	}
	extra := map[string]any{
		"ConversionSoftware":        "tauvox",
		"ConversionSoftwareVersion": c.Version,
	}
	if im.Source.Pixels != "" {
		extra["TauvoxPixelData"] = im.Source.Pixels
	}
	if len(im.Source.Warnings) > 0 {
		extra["TauvoxWarnings"] = im.Source.Warnings
	}
	if im.Source.AcquiredAt != "" {
		extra["AcquisitionDateTime"] = im.Source.AcquiredAt
	}
	if err := series.Write(c.Out, im, extra); err != nil {
		if _, serr := os.Stat(side); serr != nil {
			os.Remove(c.Out) // the NIfTI without its sidecar would lose the times
		}
		return nil, err
	}
	return im, nil
}
