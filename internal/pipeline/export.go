package pipeline

import (
	"context"
	"fmt"
	"os"
	"strings"

	"github.com/tauvox/tauvox/io/dicom"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/nifti"
)

// ExportOptions are the settings of Export.
type ExportOptions struct {
	Out   string // output folder of the DICOM files
	Force bool   // replace an existing Out holding only what tauvox wrote
	// ForceAll replaces Out whatever it holds (the user named it).
	ForceAll bool
	// Maps is a comma list of map stems ("" for all but standard errors
	// and status; see mapset.Folder.Choose).
	Maps string
	// Like is a source DICOM folder whose study and frame of reference the
	// maps join (Series picks a series in it; otherwise the one whose
	// slices match the maps). KeepIdentifiers copies its patient
	// identifiers.
	Like, Series    string
	KeepIdentifiers bool
	Software        string // SoftwareVersions, e.g. "tauvox 1.2"
}

// Export writes each chosen map of the fit output folder dir as a DICOM
// Parametric Map into o.Out (staged) and returns the stems written.
func Export(ctx context.Context, dir string, o *ExportOptions) ([]string, error) {
	folder, err := mapset.Open(dir)
	if err != nil {
		return nil, err
	}
	stems, err := folder.Choose(o.Maps)
	if err != nil {
		return nil, err
	}
	var src *dicom.Series
	if o.Like != "" {
		cat, err := dicom.Scan([]string{o.Like}, &dicom.ScanOptions{KeepIdentifiers: o.KeepIdentifiers})
		if err != nil {
			return nil, err
		}
		if o.Series != "" {
			if src, err = cat.Lookup(o.Series); err != nil {
				return nil, err
			}
		} else if len(cat.Series) == 0 {
			return nil, fmt.Errorf("%s: holds no DICOM image series", o.Like)
		} else {
			first, err := nifti.Read(folder.Maps[stems[0]])
			if err != nil {
				return nil, err
			}
			for _, s := range cat.Series {
				if s.HasGrid(first.Affine, first.Dims[2]) {
					src = s
					break
				}
			}
			if src == nil {
				return nil, fmt.Errorf("%s: no series has the slices of %s; give --series ID", o.Like, folder.Maps[stems[0]])
			}
		}
	}
	st, err := newStage(o.Out, o.Force, o.ForceAll)
	if err != nil {
		return nil, err
	}
	defer st.Abort()
	base := 1000
	if src != nil && src.Number > 0 {
		base = 100 * src.Number
	}
	for i, stem := range stems {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		im, err := nifti.Read(folder.Maps[stem])
		if err != nil {
			return nil, err
		}
		q, unit := MapQuantity(folder.Maps[stem], stem)
		if strings.HasSuffix(stem, "fitquality") {
			q, unit = "fitquality", "ratio" // R² of the fit, not the rate R2
		}
		desc := q + " map (tauvox)"
		if src != nil && src.Description != "" {
			desc = src.Description + ": " + desc
		}
		opt := &dicom.MapOptions{Quantity: q, Unit: unit, Description: desc, SeriesNumber: base + i + 1,
			Software: o.Software, Like: src, KeepIdentifiers: o.KeepIdentifiers}
		path, err := dicom.WriteParametricMap(st.Path(""), im, opt)
		if err != nil {
			return nil, fmt.Errorf("%s: %v", folder.Maps[stem], err)
		}
		if err := os.Rename(path, st.Path(dicom.SafeName(stem, 0)+".dcm")); err != nil {
			return nil, err
		}
	}
	if err := st.Commit(); err != nil {
		return nil, err
	}
	return stems, nil
}
