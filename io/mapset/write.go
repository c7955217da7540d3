package mapset

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"time"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/io/volume"
)

// Info describes the fit whose maps are written.
type Info struct {
	Model    string         // e.g. "t2"
	Method   string         // e.g. "nlls"
	Version  string         // tool version
	Settings map[string]any // every setting that shaped the result
	Inputs   []series.Input // files read
	Source   volume.Source  // series description
	Acq      []volume.Acquisition
	Timings  map[string]float64 // seconds per stage
}

// Provenance is the content of provenance.json.
type Provenance struct {
	Tool      string             `json:"tool"`
	Version   string             `json:"version"`
	Created   string             `json:"created"`
	Model     string             `json:"model"`
	Method    string             `json:"method"`
	Inputs    []InputRecord      `json:"inputs"`
	Settings  map[string]any     `json:"settings"`
	Protocol  []Protocol         `json:"protocol"`
	Field     *float64           `json:"field_T,omitempty"`
	Scanner   string             `json:"scanner,omitempty"`
	Acquired  string             `json:"acquired,omitempty"`
	Series    string             `json:"series_description,omitempty"`
	Outputs   []string           `json:"outputs"`
	Threshold float64            `json:"mask_threshold"`
	Status    map[string]int     `json:"status_counts"`
	Timings   map[string]float64 `json:"timings_s"`
	Caution   string             `json:"caution"`
}

// InputRecord names an input file and its checksum.
type InputRecord struct {
	Path   string `json:"path"`
	Role   string `json:"role"`
	SHA256 string `json:"sha256"`
	Bytes  int64  `json:"bytes"`
}

// Protocol is one volume's acquisition parameters (null when unknown).
type Protocol struct {
	TE *float64 `json:"te_ms"`
	TI *float64 `json:"ti_ms"`
	TR *float64 `json:"tr_ms"`
	FA *float64 `json:"flip_deg"`
}

// Caution is the statement every output carries.
const Caution = "tauvox is a quality-assurance and research tool, not a medical device; clinical decisions follow local regulations and licensed practice."

func num(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// Checksum returns the SHA-256 (hex) and size of a file.
func Checksum(path string) (string, int64, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", 0, err
	}
	defer f.Close()
	h := sha256.New()
	n, err := io.Copy(h, f)
	if err != nil {
		return "", 0, fmt.Errorf("%s: %w", path, err)
	}
	return hex.EncodeToString(h.Sum(nil)), n, nil
}

// Write writes every map of m (on the grid of ref) and provenance.json
// into the stage. It returns the file names written.
func Write(st *Stage, m *fit.Maps, ref *volume.Image, info *Info) ([]string, error) {
	var names []string
	grid := func(data []float32) *volume.Image {
		return &volume.Image{Dims: [4]int{ref.Dims[0], ref.Dims[1], ref.Dims[2], 1}, Data: data, Affine: ref.Affine}
	}
	side := func(stem string, extra map[string]any) error {
		b, err := json.MarshalIndent(extra, "", "  ")
		if err != nil {
			return err
		}
		return series.WriteFileAtomic(st.Path(stem+".json"), append(b, '\n'))
	}
	base := func(quantity, unit, desc string) map[string]any {
		return map[string]any{
			"Quantity":            quantity,
			"Units":               unit,
			"Description":         desc,
			"Model":               info.Model,
			"Method":              info.Method,
			"EstimationAlgorithm": fmt.Sprintf("tauvox %s model, %s method", info.Model, info.Method),
			"ToolVersion":         info.Version,
			"Sources":             sources(info.Inputs),
		}
	}
	writeMap := func(stem string, data []float32, dt nifti.Datatype, meta map[string]any) error {
		if err := nifti.Write(st.Path(stem+".nii.gz"), grid(data), &nifti.WriteOptions{Datatype: dt, Description: "tauvox " + stem}); err != nil {
			return err
		}
		names = append(names, stem+".nii.gz", stem+".json")
		return side(stem, meta)
	}
	for k, p := range m.Outputs {
		if err := writeMap(p.Map, m.Values[k], nifti.Float32, base(p.Name, p.Unit, p.Desc)); err != nil {
			return nil, err
		}
		meta := base(p.Name+" standard error", p.Unit, "standard error of "+p.Name+" from the Jacobian and the residual variance")
		if err := writeMap(p.Map+"_sd", m.SE[k], nifti.Float32, meta); err != nil {
			return nil, err
		}
	}
	if err := writeMap("fitquality", m.R2, nifti.Float32, base("R2", "1", "coefficient of determination of the fit, 1 − RSS/TSS")); err != nil {
		return nil, err
	}
	status := make([]float32, len(m.Status))
	codes := map[string]int{}
	for v, s := range m.Status {
		status[v] = float32(s)
	}
	for s := 0; s < fit.NumStatus; s++ {
		codes[fit.Status(s).String()] = s
	}
	smeta := base("status", "code", "fit outcome per voxel")
	smeta["Codes"] = codes
	if err := writeMap("status", status, nifti.Uint8, smeta); err != nil {
		return nil, err
	}

	prov := Provenance{
		Tool: "tauvox", Version: info.Version, Created: time.Now().UTC().Format(time.RFC3339),
		Model: info.Model, Method: info.Method, Settings: info.Settings,
		Field: num(info.Source.FieldStrength), Scanner: info.Source.Scanner, Acquired: info.Source.AcquiredAt,
		Series: info.Source.Description, Outputs: append([]string(nil), names...), Threshold: m.Threshold,
		Status: map[string]int{}, Timings: info.Timings, Caution: Caution,
	}
	for _, in := range info.Inputs {
		sum, n, err := Checksum(in.Path)
		if err != nil {
			return nil, err
		}
		prov.Inputs = append(prov.Inputs, InputRecord{Path: in.Path, Role: in.Role, SHA256: sum, Bytes: n})
	}
	for _, a := range info.Acq {
		prov.Protocol = append(prov.Protocol, Protocol{TE: num(a.EchoTime), TI: num(a.InversionTime), TR: num(a.RepetitionTime), FA: num(a.FlipAngle)})
	}
	for s, c := range m.Counts {
		prov.Status[fit.Status(s).String()] = c
	}
	b, err := json.MarshalIndent(prov, "", "  ")
	if err != nil {
		return nil, err
	}
	if err := series.WriteFileAtomic(st.Path("provenance.json"), append(b, '\n')); err != nil {
		return nil, err
	}
	return append(names, "provenance.json"), nil
}

func sources(in []series.Input) []string {
	var s []string
	for _, i := range in {
		s = append(s, i.Path)
	}
	return s
}
