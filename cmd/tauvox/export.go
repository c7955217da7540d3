package main

import (
	"context"
	"fmt"
	"strings"

	"github.com/tauvox/tauvox/internal/cli"
	"github.com/tauvox/tauvox/internal/pipeline"
)

const exportSummary = `Writes each map of a fit output folder (or a BIDS derivative folder) as a
DICOM Parametric Map (SOP class 1.2.840.10008.5.1.4.1.1.30): one multi-frame
file per map, DIR/<map>.dcm, values unchanged as 32-bit floats (Float Pixel
Data) with a Real World Value Mapping in the map's unit (UCUM "ms" for
times), the geometry from the NIfTI affine, new UIDs, NaN where no value.

By default every map except the standard errors (_sd) and status is written;
--maps chooses. --like SOURCE_DICOM_DIR joins the maps to the study and
frame of reference of the series they were fitted from (--series ID when it
holds several; otherwise the one whose slices match the map). No patient
identifier is written unless --keep-identifiers copies those of the source.
DIR must not exist (or give --force).`

func runExport(ctx context.Context, args []string, e *env) error {
	var out, like, seriesID, maps string
	var keep, quiet bool
	var force cli.Force
	fs := newFlags("export", "MAPS_DIR --dicom DIR [--like SOURCE_DICOM_DIR] [options]", exportSummary, e)
	fs.StringVar(&out, "dicom", "", "output folder for the DICOM files (required)")
	fs.StringVar(&like, "like", "", "source DICOM folder: copy its study and frame of reference")
	fs.StringVar(&seriesID, "series", "", "series id within --like (see tauvox scan)")
	fs.BoolVar(&keep, "keep-identifiers", false, "copy the patient name, ID, birth date and accession number of --like")
	fs.StringVar(&maps, "maps", "", "comma list of map stems to write (default: all but *_sd and status)")
	fs.Var(&force, "force", cli.ForceUsage)
	fs.BoolVar(&quiet, "quiet", false, "print nothing on success")
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
		return err
	}
	switch {
	case len(pos) != 1:
		return fmt.Errorf("give exactly one MAPS_DIR (see --help)")
	case out == "":
		return fmt.Errorf("--dicom is required (see --help)")
	case keep && like == "":
		return fmt.Errorf("--keep-identifiers needs --like")
	case seriesID != "" && like == "":
		return fmt.Errorf("--series needs --like")
	}
	all, err := force.All(out)
	if err != nil {
		return err
	}
	stems, err := pipeline.Export(ctx, pos[0], &pipeline.ExportOptions{Out: out, Force: force.On, ForceAll: all, Maps: maps, Like: like,
		Series: seriesID, KeepIdentifiers: keep, Software: "tauvox " + version()})
	if err != nil {
		return err
	}
	if !quiet {
		fmt.Fprintf(e.stdout, "wrote %d parametric map%s into %s: %s\n", len(stems), map[bool]string{true: "", false: "s"}[len(stems) == 1], out, strings.Join(stems, ", "))
	}
	return nil
}
