package bids

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/tauvox/tauvox/internal/output"
)

// quantityMaps are the BIDS qMRI map suffixes (check-values §3.6) of the
// relaxometry maps.
var quantityMaps = map[string]bool{"T1map": true, "T2map": true, "T2starmap": true, "R1map": true, "R2map": true, "R2starmap": true}

// IsQuantityMap reports whether stem (a tauvox output stem such as
// "T2map" or "M0map") is a BIDS relaxometry map suffix.
func IsQuantityMap(stem string) bool { return quantityMaps[stem] }

// DerivativeName returns the file name, with extension ext (".nii.gz",
// ".json"), of the output stem of a fit of the collection named base (the
// source entities without index and part entities) whose source suffix is
// source ("MESE"). Every output of one input carries the same desc-
// entity, its source suffix, so that the outputs of two series of one
// session (IRT1 and VFA both give T1map and M0map) stay apart and a
// listing groups them:
//
//	T2map, M0map, inveff, status, ...  <base>_desc-MESE_T2map, <base>_desc-MESE_status
//	T2map_sd, M0map_sd, ...            <base>_desc-MESEsd_T2map
//	provenance                         <base>_desc-MESE_provenance.json
//
// A standard-error map keeps the suffix of its quantity (it is in the
// quantity's unit) and appends "sd" to the desc label: BIDS allows one
// desc entity whose label is alphanumeric, so the mark cannot be a
// separate entity or a hyphenated label.
func DerivativeName(base Name, source, stem, ext string) string {
	q, sd := strings.CutSuffix(stem, "_sd")
	desc := source
	if sd {
		desc += "sd"
	}
	n := base.Without("desc")
	n.Ext = ext
	n.Suffix = q
	return n.With("desc", desc).String()
}

// URI returns the BIDS URI of a file of the dataset linked as name in
// DatasetLinks: "bids:raw:sub-01/anat/sub-01_echo-1_MESE.nii.gz" for a
// file under root. Paths outside root are returned as they are.
func URI(name, root, path string) string {
	rel, err := filepath.Rel(root, path)
	if err != nil || strings.HasPrefix(rel, "..") {
		return path
	}
	return "bids:" + name + ":" + filepath.ToSlash(rel)
}

// Description is the content of a derivative dataset_description.json
// (BIDS "Derived dataset and pipeline description").
type Description struct {
	Name           string            `json:"Name"`
	BIDSVersion    string            `json:"BIDSVersion"`
	DatasetType    string            `json:"DatasetType"`
	GeneratedBy    []Generator       `json:"GeneratedBy"`
	SourceDatasets []map[string]any  `json:"SourceDatasets,omitempty"`
	DatasetLinks   map[string]string `json:"DatasetLinks,omitempty"`
}

// Generator is one entry of GeneratedBy.
type Generator struct {
	Name        string `json:"Name"`
	Version     string `json:"Version"`
	Description string `json:"Description,omitempty"`
	CodeURL     string `json:"CodeURL,omitempty"`
}

// BIDSVersion is the version of the specification the derivative names
// follow (the snapshot of check-values §3.6 is 1.11.2-dev; 1.10.0 is the
// released version whose derivative rules it keeps).
const BIDSVersion = "1.10.0"

// WriteDescription writes dir/dataset_description.json for a derivative
// made by tauvox version from the raw dataset at raw. The raw dataset is
// linked as "raw" in DatasetLinks by its path relative to dir (so the
// URIs of Sources, "bids:raw:...", resolve when both move together).
// An existing file is replaced only when its content differs.
func WriteDescription(dir, raw, version string) error {
	absDir, err := filepath.Abs(dir)
	if err != nil {
		return err
	}
	absRaw, err := filepath.Abs(raw)
	if err != nil {
		return err
	}
	link, err := filepath.Rel(absDir, absRaw)
	if err != nil {
		link = absRaw
	}
	d := Description{
		Name: "tauvox relaxometry maps", BIDSVersion: BIDSVersion, DatasetType: "derivative",
		GeneratedBy: []Generator{{Name: "tauvox", Version: version,
			Description: "voxel-wise T1, T2 and T2* fits with standard errors, fit quality and status codes"}},
		DatasetLinks:   map[string]string{"raw": filepath.ToSlash(link)},
		SourceDatasets: []map[string]any{{"URL": filepath.ToSlash(link)}},
	}
	b, err := encodeJSON(d)
	if err != nil {
		return err
	}
	path := filepath.Join(dir, "dataset_description.json")
	if old, err := os.ReadFile(path); err == nil && string(old) == string(b) {
		return nil
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	if err := output.WriteFile(path, b); err != nil {
		return fmt.Errorf("%s: %v", path, err)
	}
	return nil
}

// CheckDerivative refuses an output folder that holds a dataset not made
// by tauvox.
func CheckDerivative(dir string) error {
	b, err := os.ReadFile(filepath.Join(dir, "dataset_description.json"))
	if errors.Is(err, os.ErrNotExist) {
		return nil
	} else if err != nil {
		return err
	}
	var d Description
	if err := json.Unmarshal(b, &d); err != nil {
		return fmt.Errorf("%s: dataset_description.json: %v", dir, err)
	}
	if d.DatasetType != "derivative" || len(d.GeneratedBy) == 0 || d.GeneratedBy[0].Name != "tauvox" {
		return fmt.Errorf("%s: holds a dataset not made by tauvox (dataset_description.json); give another --out", dir)
	}
	return nil
}
