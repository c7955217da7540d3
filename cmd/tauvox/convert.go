package main

import (
	"context"
	"fmt"

	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/io/series"
)

const convertSummary = `Writes a series or protocol that 'tauvox fit' can read as one 4-D NIfTI
(float32, the samples after rescaling) with a BIDS sidecar beside it (same
name, .json): EchoTime, InversionTime, RepetitionTime in seconds, FlipAngle
in degrees, as a number when constant and a list per volume otherwise. The
grid and affine are the ones fit uses. SERIES is a DICOM folder or file
(--series ID picks a series or protocol, --series A,B,C joins series; see
tauvox scan) or a NIfTI file. Existing files are replaced only with --force.`

func runConvert(_ context.Context, args []string, e *env) error {
	c := pipeline.Convert{Version: version()}
	var quiet bool
	fs := newFlags("convert", "SERIES --out FILE.nii.gz [--series ID|A,B,C]", convertSummary, e)
	fs.StringVar(&c.Out, "out", "", "NIfTI file to write (.nii or .nii.gz); the sidecar goes beside it")
	fs.StringVar(&c.Overrides.Series, "series", "", "DICOM series or protocol id, or series ids A,B,C to join (see tauvox scan)")
	fs.BoolVar(&c.Overrides.Derived, "derived", false, "read DICOM images marked DERIVED (left out by default)")
	fs.BoolVar(&c.Force, "force", false, "replace an existing output file and sidecar")
	fs.BoolVar(&quiet, "quiet", false, "print nothing on success")
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
		return err
	}
	if len(pos) != 1 {
		return fmt.Errorf("give exactly one SERIES (see --help)")
	}
	if c.Out == "" {
		return fmt.Errorf("give --out FILE.nii.gz (see --help)")
	}
	c.Series = pos[0]
	im, err := c.Run()
	if err != nil {
		return err
	}
	if !quiet {
		fmt.Fprintf(e.stdout, "wrote %s (%d×%d×%d, %d volumes) and %s\n", c.Out, im.Dims[0], im.Dims[1], im.Dims[2], im.Dims[3], series.SidecarName(c.Out))
		for _, w := range im.Source.Warnings {
			fmt.Fprintln(e.stderr, "warning: "+w)
		}
	}
	return nil
}
