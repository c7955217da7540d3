package mapset

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"sync"
	"time"

	"github.com/tauvox/tauvox/internal/mapped"
	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/volume"
)

// Info describes the fit whose maps are written.
type Info struct {
	Model    string         // e.g. "t2"
	Method   string         // e.g. "nlls"
	Version  string         // tool version
	Settings map[string]any // every setting that shaped the result
	Inputs   []volume.Input // files read
	Source   volume.Source  // series description
	Acq      []volume.Acquisition
	Timings  map[string]float64 // seconds per stage
	// StatusNames name the status codes (code i is StatusNames[i]), for
	// the status map's sidecar and the counts of provenance.json.
	StatusNames []string
	// AutoMask, when not nil, records the automatic mask (provenance.json
	// and the status map's sidecar).
	AutoMask *AutoMask
	// Sums, when not nil, are the checksums of Inputs already under way
	// (StartChecksums); otherwise NewWriter starts them.
	Sums Sums
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
	Pixels    string             `json:"pixel_data,omitempty"` // how the samples were stored and decoded
	Warnings  []string           `json:"warnings,omitempty"`   // e.g. lossy compression
	Patient   *volume.Patient    `json:"patient,omitempty"`
	Outputs   []string           `json:"outputs"`
	Threshold float64            `json:"mask_threshold"`
	AutoMask  *AutoMask          `json:"auto_mask,omitempty"`
	Status    map[string]int     `json:"status_counts"`
	Timings   map[string]float64 `json:"timings_s"`
	Caution   string             `json:"caution"`
}

// AutoMask is the automatic mask's rule and level as provenance.json and
// the status map's sidecar record them (the fields of fit.AutoMask).
type AutoMask struct {
	Rule      string  `json:"rule"`                        // "noise" or "otsu"
	Threshold float64 `json:"threshold"`                   // level a voxel's largest sample must reach
	Sigma     float64 `json:"noise_sd,omitempty"`          // noise SD from the air (noise rule)
	Rate      float64 `json:"air_rate,omitempty"`          // designed false-exceedance rate per air voxel
	Air       int     `json:"air_voxels,omitempty"`        // air voxels the noise estimate used
	Otsu      float64 `json:"half_otsu"`                   // half of Otsu's threshold of the peaks
	Why       string  `json:"noise_rule_unused,omitempty"` // why the noise rule did not apply
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
	if n, ok, err := hashMapped(h, f); ok {
		if err != nil {
			return "", 0, fmt.Errorf("%s: %w", path, err)
		}
		return hex.EncodeToString(h.Sum(nil)), n, nil
	}
	n, err := io.Copy(h, f)
	if err != nil {
		return "", 0, fmt.Errorf("%s: %w", path, err)
	}
	return hex.EncodeToString(h.Sum(nil)), n, nil
}

// hashChunk is how much of a mapped file hashMapped hashes before it
// gives those pages back.
const hashChunk = 8 << 20

// hashMapped hashes a regular file of at least 2 chunks from its mapping
// (mapped.File) instead of reading it: the read's copy out of the page
// cache was a third of the checksum's CPU time on the 47 MB series of
// docs/benchmarks.md (25 of 75 ms). The pages hashed are released chunk
// by chunk (mapped.Release), so the resident size grows by a chunk, not
// the file. ok is false when the file was not mapped (the caller then
// reads it); a fault on the mapping (the file shrank) is an error.
func hashMapped(h io.Writer, f *os.File) (n int64, ok bool, err error) {
	fi, err := f.Stat()
	if err != nil || !fi.Mode().IsRegular() || fi.Size() < 2*hashChunk {
		return 0, false, nil
	}
	mem, unmap, err := mapped.File(f, fi.Size())
	if err != nil {
		return 0, false, nil
	}
	defer unmap()
	for off := 0; off < len(mem); off += hashChunk {
		end := min(off+hashChunk, len(mem))
		if err := mapped.Guard(mem, func() { h.Write(mem[off:end]) }); err != nil {
			return 0, true, err
		}
		mapped.Release(mem, off, end)
	}
	return int64(len(mem)), true, nil
}

// Output describes one map of a fit: a fitted parameter or a quantity
// derived from one (the fields of fit.Param).
type Output struct {
	Name string // quantity, e.g. "T2"
	Unit string // unit, e.g. "ms", "1/s", "arbitrary"
	Map  string // file stem, BIDS suffix where one exists, e.g. "T2map"
	Desc string // one-line description for the sidecar
}

// Slab is a range of whole slices of every map of a fit, one entry per
// voxel (as fit.Maps holds them).
type Slab struct {
	Values    [][]float32 // [output][voxel], NaN where not fitted
	SE        [][]float32 // [output][voxel]
	R2        []float32   // coefficient of determination
	Status    []uint8     // status codes
	Counts    []int       // voxels per status code
	Threshold float64     // the mask threshold applied (0 when none)
}

// Write writes every map of m (outputs outs, on the grid of ref) and
// provenance.json into the stage. It returns the file names written. It
// is NewWriter, one Append and Close.
func Write(st *Stage, outs []Output, m *Slab, ref *volume.Image, info *Info) ([]string, error) {
	w, err := NewWriter(st, outs, [3]int{ref.Dims[0], ref.Dims[1], ref.Dims[2]}, ref.Affine, info)
	if err != nil {
		return nil, err
	}
	if err := w.Append(m); err != nil {
		return nil, err
	}
	return w.Close()
}

// Writer writes the maps of a fit slab by slab (ranges of whole slices, in
// order): every map file is opened at the start with its header, each
// Append adds one slab to every file (compressed in parallel, one
// goroutine per file), and Close finishes the files and writes the
// sidecars and provenance.json. Memory does not grow with the number of
// slices. A Writer is not safe for concurrent use.
type Writer struct {
	st     *Stage
	info   *Info
	outs   []Output
	files  []*nifti.StreamWriter
	stems  []string
	metas  []map[string]any
	counts []int
	thr    float64
	status []float32
	err    error
	closed bool
	// sums receives the checksums of the inputs, computed while the maps
	// are made (reading a large series takes a while).
	sums Sums
}

type checksums struct {
	recs []InputRecord
	err  error
}

// Sums delivers the checksums of a fit's inputs, computed in the
// background (StartChecksums).
type Sums = chan checksums

// StartChecksums starts computing the SHA-256 of every input in the
// background, for Info.Sums: a caller that starts it before reading a
// large series lets it run while a CPU is otherwise idle (inflating a
// .nii.gz is sequential).
func StartChecksums(inputs []volume.Input) Sums {
	ch := make(chan checksums, 1)
	go func(in []volume.Input) {
		var c checksums
		for _, i := range in {
			sum, n, err := Checksum(i.Path)
			if err != nil {
				c.err = err
				break
			}
			c.recs = append(c.recs, InputRecord{Path: FinalPath(i.Path), Role: i.Role, SHA256: sum, Bytes: n})
		}
		ch <- c
	}(append([]volume.Input(nil), inputs...))
	return ch
}

// NewWriter opens every map of a fit with outputs outs on a grid of dims
// voxels with the given affine.
func NewWriter(st *Stage, outs []Output, dims [3]int, affine volume.Affine, info *Info) (*Writer, error) {
	w := &Writer{st: st, info: info, outs: outs, sums: info.Sums, counts: make([]int, len(info.StatusNames))}
	if w.sums == nil {
		w.sums = StartChecksums(info.Inputs)
	}
	grid := [4]int{dims[0], dims[1], dims[2], 1}
	open := func(stem string, dt nifti.Datatype, meta map[string]any) error {
		f, err := nifti.Create(st.Path(stem+".nii.gz"), grid, affine, &nifti.WriteOptions{Datatype: dt, Description: "tauvox " + stem, Compression: nifti.RunsCompression})
		if err != nil {
			return err
		}
		w.files = append(w.files, f)
		w.stems = append(w.stems, stem)
		w.metas = append(w.metas, meta)
		return nil
	}
	for _, p := range outs {
		if err := open(p.Map, nifti.Float32, w.base(p.Name, p.Unit, p.Desc)); err != nil {
			w.Abort()
			return nil, err
		}
		meta := w.base(p.Name+" standard error", p.Unit, "standard error of "+p.Name+" from the Jacobian and the residual variance")
		if err := open(p.Map+"_sd", nifti.Float32, meta); err != nil {
			w.Abort()
			return nil, err
		}
	}
	if err := open("fitquality", nifti.Float32, w.base("R2", "1", "coefficient of determination of the fit, 1 − RSS/TSS")); err != nil {
		w.Abort()
		return nil, err
	}
	codes := map[string]int{}
	for s, name := range info.StatusNames {
		codes[name] = s
	}
	smeta := w.base("status", "code", "fit outcome per voxel")
	smeta["Codes"] = codes
	if info.AutoMask != nil {
		smeta["AutoMask"] = info.AutoMask
	}
	if err := open("status", nifti.Uint8, smeta); err != nil {
		w.Abort()
		return nil, err
	}
	return w, nil
}

func (w *Writer) base(quantity, unit, desc string) map[string]any {
	return map[string]any{
		"Quantity":            quantity,
		"Units":               unit,
		"Description":         desc,
		"Model":               w.info.Model,
		"Method":              w.info.Method,
		"EstimationAlgorithm": fmt.Sprintf("tauvox %s model, %s method", w.info.Model, w.info.Method),
		"ToolVersion":         w.info.Version,
		"Sources":             sources(w.info.Inputs),
	}
}

// Append writes the next slab of maps (whole slices, in order) and adds
// its status counts. m must hold the outputs given to NewWriter.
func (w *Writer) Append(m *Slab) error {
	if w.err != nil {
		return w.err
	}
	if len(m.Values) != len(w.outs) {
		w.err = fmt.Errorf("mapset: %d outputs appended, %d opened", len(m.Values), len(w.outs))
		w.Abort()
		return w.err
	}
	if cap(w.status) < len(m.Status) {
		w.status = make([]float32, len(m.Status))
	}
	w.status = w.status[:len(m.Status)]
	for v, s := range m.Status {
		w.status[v] = float32(s)
	}
	parts := make([][]float32, 0, len(w.files))
	for k := range m.Values {
		parts = append(parts, m.Values[k], m.SE[k])
	}
	parts = append(parts, m.R2, w.status)
	errs := make([]error, len(parts))
	var wg sync.WaitGroup
	for i := range parts {
		wg.Add(1)
		go func(i int) {
			defer wg.Done()
			errs[i] = w.files[i].Append(parts[i])
		}(i)
	}
	wg.Wait()
	if err := first(errs); err != nil {
		w.err = err
		w.Abort()
		return err
	}
	for s, c := range m.Counts {
		if s < len(w.counts) {
			w.counts[s] += c
		}
	}
	w.thr = m.Threshold
	return nil
}

// Close finishes every map, writes the sidecars and provenance.json, and
// returns the file names written. The timings in the Info are read now,
// so a caller may add to them up to Close.
func (w *Writer) Close() ([]string, error) {
	if w.err != nil {
		return nil, w.err
	}
	if w.closed {
		return nil, errors.New("mapset: writer already closed")
	}
	w.closed = true
	// The small files are made first; then every map is finished and
	// every small file written at once, so that their flushes to disk
	// (each file is synced before it is renamed) overlap.
	var names []string
	files := map[string][]byte{}
	for i, stem := range w.stems {
		b, err := json.MarshalIndent(w.metas[i], "", "  ")
		if err != nil {
			return nil, err
		}
		files[stem+".json"] = append(b, '\n')
		names = append(names, stem+".nii.gz", stem+".json")
	}
	info := w.info
	prov := Provenance{
		Tool: "tauvox", Version: info.Version, Created: time.Now().UTC().Format(time.RFC3339),
		Model: info.Model, Method: info.Method, Settings: info.Settings,
		Field: num(info.Source.FieldStrength), Scanner: info.Source.Scanner, Acquired: info.Source.AcquiredAt,
		Series: info.Source.Description, Pixels: info.Source.Pixels, Warnings: info.Source.Warnings, Patient: info.Source.Patient, Outputs: append([]string(nil), names...), Threshold: w.thr, AutoMask: info.AutoMask,
		Status: map[string]int{}, Timings: info.Timings, Caution: output.Caution,
	}
	sums := <-w.sums
	if sums.err != nil {
		w.err = sums.err
		w.Abort()
		return nil, sums.err
	}
	prov.Inputs = sums.recs
	for _, a := range info.Acq {
		prov.Protocol = append(prov.Protocol, Protocol{TE: num(a.EchoTime), TI: num(a.InversionTime), TR: num(a.RepetitionTime), FA: num(a.FlipAngle)})
	}
	for s, c := range w.counts {
		prov.Status[info.StatusNames[s]] = c
	}
	b, err := json.MarshalIndent(prov, "", "  ")
	if err != nil {
		return nil, err
	}
	files["provenance.json"] = append(b, '\n')

	errs := make([]error, len(w.files)+len(files))
	var wg sync.WaitGroup
	for i, f := range w.files {
		wg.Add(1)
		go func() {
			defer wg.Done()
			errs[i] = f.Close()
		}()
	}
	i := len(w.files)
	for name, data := range files {
		wg.Add(1)
		go func(i int) {
			defer wg.Done()
			errs[i] = output.WriteFile(w.st.Path(name), data)
		}(i)
		i++
	}
	wg.Wait()
	if err := first(errs); err != nil {
		w.err = err
		w.Abort()
		return nil, err
	}
	return append(names, "provenance.json"), nil
}

// Abort abandons every map file not yet closed (the stage's own Abort
// removes the folder).
func (w *Writer) Abort() {
	for _, f := range w.files {
		f.Abort()
	}
}

func sources(in []volume.Input) []string {
	var s []string
	for _, i := range in {
		s = append(s, FinalPath(i.Path))
	}
	return s
}

// first returns the first error of errs: when the disk fills, every map
// fails the same way and one line says it.
func first(errs []error) error {
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}
