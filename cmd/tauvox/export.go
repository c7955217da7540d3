package main

import (
	"context"
	"fmt"
	"os"
	"strings"

	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/io/dicom"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/nifti"
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
	var keep, force, quiet bool
	fs := newFlags("export", "MAPS_DIR --dicom DIR [--like SOURCE_DICOM_DIR] [options]", exportSummary, e)
	fs.StringVar(&out, "dicom", "", "output folder for the DICOM files (required)")
	fs.StringVar(&like, "like", "", "source DICOM folder: copy its study and frame of reference")
	fs.StringVar(&seriesID, "series", "", "series id within --like (see tauvox scan)")
	fs.BoolVar(&keep, "keep-identifiers", false, "copy the patient name, ID, birth date and accession number of --like")
	fs.StringVar(&maps, "maps", "", "comma list of map stems to write (default: all but *_sd and status)")
	fs.BoolVar(&force, "force", false, "replace an existing output folder")
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
	folder, err := mapset.Open(pos[0])
	if err != nil {
		return err
	}
	stems, err := chooseMaps(folder, pos[0], maps)
	if err != nil {
		return err
	}
	var src *dicom.Series
	if like != "" {
		cat, err := dicom.Scan([]string{like}, &dicom.ScanOptions{KeepIdentifiers: keep})
		if err != nil {
			return err
		}
		if seriesID != "" {
			if src, err = cat.Lookup(seriesID); err != nil {
				return err
			}
		} else if len(cat.Series) == 0 {
			return fmt.Errorf("%s: holds no DICOM image series", like)
		} else {
			first, err := nifti.Read(folder.Maps[stems[0]])
			if err != nil {
				return err
			}
			for _, s := range cat.Series {
				if s.HasGrid(first.Affine, first.Dims[2]) {
					src = s
					break
				}
			}
			if src == nil {
				return fmt.Errorf("%s: no series has the slices of %s; give --series ID", like, folder.Maps[stems[0]])
			}
		}
	}
	st, err := mapset.NewStage(out, force)
	if err != nil {
		return err
	}
	defer st.Abort()
	base := 1000
	if src != nil && src.Number > 0 {
		base = 100 * src.Number
	}
	for i, stem := range stems {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		im, err := nifti.Read(folder.Maps[stem])
		if err != nil {
			return err
		}
		q, unit := pipeline.MapQuantity(folder.Maps[stem], stem)
		if strings.HasSuffix(stem, "fitquality") {
			q, unit = "fitquality", "ratio" // R² of the fit, not the rate R2
		}
		desc := q + " map (tauvox)"
		if src != nil && src.Description != "" {
			desc = src.Description + ": " + desc
		}
		opt := &dicom.MapOptions{Quantity: q, Unit: unit, Description: desc, SeriesNumber: base + i + 1,
			Software: "tauvox " + version(), Like: src, KeepIdentifiers: keep}
		path, err := dicom.WriteParametricMap(st.Path(""), im, opt)
		if err != nil {
			return fmt.Errorf("%s: %v", folder.Maps[stem], err)
		}
		if err := os.Rename(path, st.Path(dicom.SafeName(stem, 0)+".dcm")); err != nil {
			return err
		}
	}
	if err := st.Commit(); err != nil {
		return err
	}
	if !quiet {
		fmt.Fprintf(e.stdout, "wrote %d parametric map%s into %s: %s\n", len(stems), map[bool]string{true: "", false: "s"}[len(stems) == 1], out, strings.Join(stems, ", "))
	}
	return nil
}

// chooseMaps returns the map stems of folder (read from dir) named in the
// comma list maps, or, when it is empty, every map but the standard
// errors (_sd, BIDS desc-sd) and status.
func chooseMaps(folder *mapset.Folder, dir, maps string) ([]string, error) {
	var stems []string
	if maps != "" {
		for _, s := range strings.Split(maps, ",") {
			s = strings.TrimSpace(s)
			if _, ok := folder.Maps[s]; !ok {
				return nil, fmt.Errorf("%s: no map %q (have %s)", dir, s, strings.Join(folder.Stems(), ", "))
			}
			stems = append(stems, s)
		}
		return stems, nil
	}
	for _, s := range folder.Stems() {
		if !strings.HasSuffix(s, "_sd") && !strings.HasSuffix(s, "status") && !strings.Contains(s, "desc-sd") && !strings.Contains(s, "sd_") {
			stems = append(stems, s)
		}
	}
	return stems, nil
}
