package dicom

import (
	"bufio"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/internal/regular"
	"github.com/tauvox/tauvox/volume"
)

// ScanOptions are the settings of Scan. The zero value (and nil) leaves
// out localizers and derived images, keeps no patient identifiers, and
// uses the default limits.
type ScanOptions struct {
	// Localizers keeps images whose ImageType contains LOCALIZER (left
	// out by default).
	Localizers bool
	// Derived keeps images whose ImageType starts with DERIVED (maps,
	// reformats, subtractions; left out by default).
	Derived bool
	// KeepIdentifiers fills Series.Identifiers with the patient name,
	// patient ID, birth date and accession number. By default no patient
	// identifier leaves this package.
	KeepIdentifiers bool
	// MaxHeaderBytes caps the bytes read (or inflated) before the pixel
	// data of one file. Defaults to 64 MiB if 0 or negative.
	MaxHeaderBytes int64
	// MaxBytes caps the memory of one loaded series (4 bytes per
	// sample). Defaults to 2 GiB if 0 or negative.
	MaxBytes int64
}

func (o *ScanOptions) maxHead() int64 {
	if o == nil || o.MaxHeaderBytes <= 0 {
		return defaultMaxHeadBytes
	}
	return o.MaxHeaderBytes
}

func (o *ScanOptions) maxBytes() int64 {
	if o == nil || o.MaxBytes <= 0 {
		return defaultMaxImageBytes
	}
	return min(o.MaxBytes, 1<<60)
}

// Problem is a file or series that Scan could not use, with the reason.
// Err's text is one line that starts with the path.
type Problem struct {
	Path string
	Err  error
}

func (p Problem) String() string { return p.Err.Error() }

// MarshalJSON writes {"path": ..., "error": ...}.
func (p Problem) MarshalJSON() ([]byte, error) {
	return json.Marshal(struct {
		Path  string `json:"path"`
		Error string `json:"error"`
	}{p.Path, p.Err.Error()})
}

// Catalog is the result of Scan: every series found, and what was left
// out.
type Catalog struct {
	Series     []*Series `json:"series"`
	Files      int       `json:"files"`      // DICOM image files read
	Skipped    int       `json:"skipped"`    // files that are not DICOM
	Unreadable int       `json:"unreadable"` // DICOM-like files that could not be read (each has a Problem)
	Ignored    int       `json:"ignored"`    // localizers, derived images and non-image DICOM objects left out
	Problems   []Problem `json:"problems"`   // unreadable files and series that cannot be loaded
	// Protocols are relaxation series split over several DICOM series
	// (one per TI, flip angle, TE or TR) on one grid.
	Protocols []*Protocol `json:"protocols"`

	opt ScanOptions
}

// Series summarises one series: the files of one SeriesInstanceUID with
// one orientation, matrix and image type.
type Series struct {
	// ID is short and stable across scans: the series number, '-', and
	// six hex digits of a hash of the SeriesInstanceUID (and of the split
	// key when a series was split), e.g. "7-3fa2c1".
	ID          string        `json:"id"`
	UID         string        `json:"series_uid"`
	StudyUID    string        `json:"study_uid"`
	Number      int           `json:"number"` // SeriesNumber, 0 when absent
	Description string        `json:"description"`
	SOPClass    string        `json:"sop_class"`
	Enhanced    bool          `json:"enhanced"`   // multi-frame with functional groups
	ImageType   string        `json:"image_type"` // ImageType, or FrameType/ComplexImageComponent
	Sequence    string        `json:"scanning_sequence"`
	Varying     string        `json:"varying"` // "EchoTime", "InversionTime", "FlipAngle", "RepetitionTime", "EchoNumber" or ""
	Values      []float64     `json:"values"`  // distinct values of Varying, ascending (ms, degrees or echo numbers)
	Echo        string        `json:"echo"`    // echo trains: "SE" (spin echo) or "GR" (gradient echo) when the headers tell, else ""
	Rows        int           `json:"rows"`
	Columns     int           `json:"columns"`
	Slices      int           `json:"slices"`
	Volumes     int           `json:"volumes"`
	Files       int           `json:"files"`
	Frames      int           `json:"frames"`
	Source      volume.Source `json:"source"`
	// Identifiers is nil unless ScanOptions.KeepIdentifiers was set.
	Identifiers *Identifiers `json:"identifiers,omitempty"`
	// Notes are remarks that do not stop loading (a split series, a
	// second varying parameter).
	Notes []string `json:"notes,omitempty"`
	// Problem is why the series cannot be loaded ("" when it can).
	Problem string `json:"problem,omitempty"`
	// Fixed lists the acquisition parameters that are the same in every
	// image, e.g. "TI 300 ms, TR 6000 ms, TE 12 ms, FA 90°" (what a
	// single-volume series contributes to a protocol).
	Fixed string `json:"fixed,omitempty"`

	frames []*frameInfo
	key    string
	lay    *layout
	err    error
	opt    *ScanOptions
}

// Err returns why the series cannot be loaded, or nil.
func (s *Series) Err() error { return s.err }

// Scan finds the DICOM series in paths (files, or folders searched
// recursively; symbolic links to folders are not followed). Files are
// recognised by content, not name: the Part-10 preamble with "DICM" at
// byte 128, or a bare data set starting with a group 0008 element. Only
// headers are read (up to the pixel data). Unreadable files are counted
// and listed in Problems; the scan goes on. The error is non-nil only when
// a path itself cannot be read.
func Scan(paths []string, opt *ScanOptions) (*Catalog, error) {
	c := &Catalog{}
	if opt != nil {
		c.opt = *opt
	}
	var files []string
	seen := map[string]bool{}
	for _, p := range paths {
		st, err := os.Stat(p)
		if err != nil {
			return nil, &fileError{p, "scan", err}
		}
		if !st.IsDir() {
			if !seen[p] {
				seen[p] = true
				files = append(files, p)
			}
			continue
		}
		err = filepath.WalkDir(p, func(path string, d fs.DirEntry, err error) error {
			if err != nil {
				c.problem(path, &fileError{path, "read folder", err})
				c.Unreadable++
				if d != nil && d.IsDir() {
					return fs.SkipDir
				}
				return nil
			}
			if d.IsDir() || seen[path] {
				return nil
			}
			seen[path] = true
			files = append(files, path)
			return nil
		})
		if err != nil {
			return nil, &fileError{p, "scan", err}
		}
	}
	sort.Strings(files)

	// Headers are read on every CPU; the results are gathered in file
	// order, so the catalog does not depend on the number of goroutines.
	type result struct {
		fi      *fileInfo
		ignored bool
		err     error
	}
	res := make([]result, len(files))
	workers := max(min(runtime.GOMAXPROCS(0), len(files)), 1)
	var next atomic.Int64
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			sc := &scratch{head: make([]byte, firstChunk), br: bufio.NewReaderSize(nil, 4096)}
			for {
				i := int(next.Add(1) - 1)
				if i >= len(files) {
					return
				}
				r := &res[i]
				r.fi, r.ignored, r.err = c.readFile(files[i], sc)
			}
		}()
	}
	wg.Wait()
	infos := make([]*fileInfo, 0, len(files))
	for i, r := range res {
		path := files[i]
		switch {
		case r.err == nil && r.ignored:
			c.Ignored++
		case r.err == nil:
			c.Files++
			infos = append(infos, r.fi)
		case errors.Is(r.err, errNotDICOM):
			c.Skipped++
		case errors.Is(r.err, regular.ErrNotRegular):
			c.Skipped++
			c.problem(path, r.err) // a FIFO, socket or device: noted, not read
		default:
			c.Unreadable++
			c.problem(path, r.err)
		}
	}
	c.group(infos)
	return c, nil
}

func (c *Catalog) problem(path string, err error) {
	c.Problems = append(c.Problems, Problem{Path: path, Err: err})
}

// scratch is what one goroutine of Scan reuses from file to file: the
// first chunk of each file (the head is dropped once parsed; the file
// info keeps only values copied out of it) and the library's buffered
// reader.
type scratch struct {
	head []byte
	br   *bufio.Reader
}

// readFile reads one header; ignored is true for a file left out
// (localizers, derived images, objects without pixel data). It only reads
// c's options, so that files can be read at once.
func (c *Catalog) readFile(path string, sc *scratch) (fi *fileInfo, ignored bool, err error) {
	rf, err := readHeadInto(path, c.opt.maxHead(), sc.head)
	if err != nil {
		return nil, false, err
	}
	fi, err = parseHeadWith(rf, c.opt.KeepIdentifiers, sc.br)
	rf.head = nil // keep only what the grouping needs
	if err != nil {
		return nil, false, err
	}
	if !rf.pix.found {
		return nil, true, nil // a DICOM object without pixel data (report, presentation state, ...)
	}
	for i, v := range fi.imageType {
		if v == "LOCALIZER" && !c.opt.Localizers || i == 0 && v == "DERIVED" && !c.opt.Derived {
			return nil, true, nil
		}
	}
	if fi.seriesUID == "" {
		return nil, false, formatErr(path, "image without SeriesInstanceUID (0020,000E)", nil)
	}
	return fi, false, nil
}

// splitKey is what must agree inside one series: orientation, matrix and
// image type.
func splitKey(fr *frameInfo) string {
	var b strings.Builder
	if fr.hasIOP {
		for i, v := range fr.iop {
			if i > 0 {
				b.WriteByte(',')
			}
			b.WriteString(strconv.FormatFloat(math.Round(v*1e4)/1e4+0, 'f', 4, 64))
		}
	} else {
		b.WriteString("no-orientation")
	}
	fmt.Fprintf(&b, "|%dx%d|%s", fr.file.cols, fr.file.rows, fr.kind)
	return b.String()
}

// group builds the series from the file headers.
func (c *Catalog) group(infos []*fileInfo) {
	type part struct {
		uid, key string
	}
	parts := map[part]*Series{}
	byUID := map[string][]*Series{}
	for _, fi := range infos {
		for k := range fi.frames {
			fr := &fi.frames[k]
			p := part{fi.seriesUID, splitKey(fr)}
			s := parts[p]
			if s == nil {
				s = &Series{UID: fi.seriesUID, key: p.key, opt: &c.opt}
				parts[p] = s
				byUID[fi.seriesUID] = append(byUID[fi.seriesUID], s)
				c.Series = append(c.Series, s)
			}
			s.frames = append(s.frames, fr)
		}
	}
	for uid, list := range byUID {
		if len(list) > 1 {
			c.noteSplit(uid, list)
		}
	}
	for _, s := range c.Series {
		s.summarise()
		if s.err != nil {
			c.problem(s.Source.Path, s.err)
		}
	}
	sort.SliceStable(c.Series, func(a, b int) bool {
		sa, sb := c.Series[a], c.Series[b]
		if sa.Number != sb.Number {
			return sa.Number < sb.Number
		}
		if sa.UID != sb.UID {
			return sa.UID < sb.UID
		}
		return sa.key < sb.key
	})
	c.protocols()
}

// noteSplit records how a series was split. Mixed matrix sizes are also a
// problem: they usually mean a stray file.
func (c *Catalog) noteSplit(uid string, list []*Series) {
	var desc []string
	matrices := map[string]bool{}
	total := 0
	for _, s := range list {
		total += len(s.frames)
	}
	for _, s := range list {
		f := s.frames[0].file
		matrices[fmt.Sprintf("%dx%d", f.cols, f.rows)] = true
		desc = append(desc, fmt.Sprintf("%d×%d %s (%d of %d images)", f.cols, f.rows, s.frames[0].kind, len(s.frames), total))
	}
	note := fmt.Sprintf("series %s was split by orientation, matrix or image type into %d parts: %s", uid, len(list), strings.Join(desc, "; "))
	for _, s := range list {
		s.Notes = append(s.Notes, note)
	}
	if len(matrices) > 1 {
		// Name the files of the smallest part and compare with the largest.
		small, big := list[0], list[0]
		for _, s := range list {
			if len(s.frames) < len(small.frames) {
				small = s
			}
		}
		big = nil
		for _, s := range list {
			f, fs := s.frames[0].file, small.frames[0].file
			if (f.cols != fs.cols || f.rows != fs.rows) && (big == nil || len(s.frames) > len(big.frames)) {
				big = s
			}
		}
		var names []string
		for i, fr := range small.frames {
			if i == 3 {
				names = append(names, "...")
				break
			}
			names = append(names, frameName(fr))
		}
		fs, fb := small.frames[0].file, big.frames[0].file
		c.problem(fs.raw.path, formatErr(strings.Join(names, ", "),
			fmt.Sprintf("matrix %d×%d (Columns×Rows) differs from %d×%d of the other %d images of series %d (%s); the series is split",
				fs.cols, fs.rows, fb.cols, fb.rows, len(big.frames), fb.seriesNumber, uid), nil))
	}
}

// summarise fills the exported fields of s from its frames and arranges
// the grid.
func (s *Series) summarise() {
	f0 := s.frames[0].file
	s.StudyUID = f0.studyUID
	s.Number = f0.seriesNumber
	s.Description = f0.description
	s.SOPClass = f0.sopClass
	s.Enhanced = f0.enhanced
	s.ImageType = s.frames[0].kind
	s.Sequence = f0.scanningSeq
	s.Rows, s.Columns = f0.rows, f0.cols
	s.Identifiers = f0.ids
	s.Frames = len(s.frames)
	files := map[*fileInfo]bool{}
	acquired := ""
	dir := ""
	for _, fr := range s.frames {
		f := fr.file
		if !files[f] {
			files[f] = true
			d := filepath.Dir(f.raw.path)
			if dir == "" {
				dir = d
			} else {
				dir = commonDir(dir, d)
			}
			if a := f.acquired; a != "" && (acquired == "" || a < acquired) {
				acquired = a
			}
		}
	}
	s.Files = len(files)
	h := sha256.Sum256([]byte(s.UID + "|" + s.key))
	prefix := "s"
	if f0.hasNumber {
		prefix = strconv.Itoa(f0.seriesNumber)
	}
	s.ID = prefix + "-" + hex.EncodeToString(h[:3])
	s.Source = volume.Source{
		Path:          dir,
		Format:        "dicom",
		Description:   f0.description,
		FieldStrength: math.NaN(),
		Scanner:       f0.station,
		AcquiredAt:    rfc3339(acquired),
	}
	if f0.field > 0 {
		s.Source.FieldStrength = f0.field
	}
	if id := f0.ids; id != nil {
		s.Source.Patient = &volume.Patient{Name: id.PatientName, ID: id.PatientID, BirthDate: id.PatientBirthDate, Accession: id.AccessionNumber}
	}
	if s.Source.Scanner == "" {
		s.Source.Scanner = strings.TrimSpace(f0.manufacturer + " " + f0.model)
	}

	s.classify()
	if m := mosaicIn(s); m != nil {
		s.err = m // never stacked as single slices
	} else {
		s.lay, s.err = arrange(s)
	}
	s.Frames = len(s.frames) // without dropped duplicates
	s.Fixed = fixedParams(s.frames)
	if s.lay != nil {
		s.Slices, s.Volumes = s.lay.nz, s.lay.nt
	}
	if s.err == nil {
		s.err = s.unsupported()
	}
	if s.err != nil {
		s.Problem = s.err.Error()
	}
}

func commonDir(a, b string) string {
	for a != b {
		if len(a) > len(b) {
			a = filepath.Dir(a)
		} else {
			b = filepath.Dir(b)
		}
		if a == "." || b == "." || a == string(filepath.Separator) || b == string(filepath.Separator) {
			if a == b {
				return a
			}
			if len(a) < len(b) {
				return a
			}
			return b
		}
	}
	return a
}

// mosaicIn reports the first mosaic among the files of s.
func mosaicIn(s *Series) error {
	for _, fr := range s.frames {
		if f := fr.file; f.mosaic != "" {
			return unsupportedErr(f.raw.path, "mosaic ("+f.mosaic+"): tauvox does not un-tile mosaics and will not read one as a single slice; convert the series to NIfTI with a mosaic-aware converter", nil)
		}
	}
	return nil
}

// unsupported reports the first file of s whose pixel data this package
// cannot decode.
func (s *Series) unsupported() error {
	for _, fr := range s.frames {
		f := fr.file
		rf := f.raw
		switch {
		case rf.syn.encapsulated && rf.pix.vl != undefinedLength:
			return formatErr(rf.path, fmt.Sprintf("pixel data of defined length in the compressed transfer syntax %s (%s); PS3.5 §A.4 requires fragments of undefined length", rf.syn.name, rf.syn.uid), nil)
		case rf.syn.encapsulated:
			if err := checkCodec(rf); err != nil {
				return err
			}
		case rf.pix.vl == undefinedLength:
			return formatErr(rf.path, fmt.Sprintf("pixel data of undefined length (encapsulated) in the uncompressed transfer syntax %s", rf.syn.name), nil)
		}
		switch {
		case f.samples != 1:
			return unsupportedErr(rf.path, fmt.Sprintf("%d samples per pixel (colour); tauvox reads grey-scale images", f.samples), nil)
		case rf.pix.tag == 0x7FE00010 && f.bitsAlloc != 8 && f.bitsAlloc != 16 && f.bitsAlloc != 32:
			return unsupportedErr(rf.path, fmt.Sprintf("BitsAllocated %d; tauvox reads 8, 16 and 32 bits", f.bitsAlloc), nil)
		case rf.pix.tag == 0x7FE00010 && (f.bitsStored < 1 || f.bitsStored > f.bitsAlloc):
			return formatErr(rf.path, fmt.Sprintf("BitsStored %d with BitsAllocated %d", f.bitsStored, f.bitsAlloc), nil)
		}
	}
	return nil
}

// volKey identifies the volume a frame belongs to.
type volKey struct {
	te, ti, tr, fa int64
	echo           int
}

// unknownKey stands for a NaN parameter in a volKey.
const unknownKey = math.MinInt64

func quant(v float64) int64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return unknownKey
	}
	return int64(math.Round(v * 1e4)) // 0.1 µs or 1e-4 degree
}

func keyOf(fr *frameInfo) volKey {
	return volKey{quant(fr.te), quant(fr.ti), quant(fr.tr), quant(fr.fa), fr.echo}
}

// classify finds the varying parameter (volume.Varying, the rule scan
// applies to NIfTI series too) and, for echo trains, the echo kind.
func (s *Series) classify() {
	acq := make([]volume.Acquisition, len(s.frames))
	echoes := map[int]bool{}
	for i, fr := range s.frames {
		acq[i] = volume.Acquisition{EchoTime: fr.te, InversionTime: fr.ti, RepetitionTime: fr.tr, FlipAngle: fr.fa}
		echoes[fr.echo] = true
	}
	v := volume.Varying(acq)
	if len(v) == 0 {
		if len(echoes) > 1 {
			s.Varying = "EchoNumber"
			for e := range echoes {
				s.Values = append(s.Values, float64(e))
			}
			sort.Float64s(s.Values)
		}
		return
	}
	s.Varying, s.Values = v[0].Name, v[0].Values
	for _, o := range v[1:] {
		s.Notes = append(s.Notes, fmt.Sprintf("%s also varies (%d values)", o.Name, len(o.Values)))
	}
	if s.Varying == "EchoTime" {
		s.Echo = echoKind(s.frames[0].file)
		if s.Echo == "" {
			s.Notes = append(s.Notes, "echo time varies but neither ScanningSequence nor SequenceName tells spin echo from gradient echo")
		}
	}
}

// echoKind tells a multi-echo spin echo ("SE") from a multi-echo
// gradient echo ("GR") by ScanningSequence (PS3.3 C.8.3.1: SE, GR,
// ...), EchoPulseSequence of enhanced files (SPIN, GRADIENT), or common
// vendor sequence-name fragments (common practice).
func echoKind(f *fileInfo) string {
	parts := strings.Split(f.scanningSeq, `\`)
	has := func(v string) bool {
		for _, p := range parts {
			if strings.TrimSpace(p) == v {
				return true
			}
		}
		return false
	}
	switch {
	case has("GR"):
		return "GR"
	case has("SE"):
		return "SE"
	case f.echoPulse == "GRADIENT":
		return "GR"
	case f.echoPulse == "SPIN":
		return "SE"
	}
	name := strings.ToLower(strings.TrimLeft(f.seqName, "*"))
	for _, h := range []string{"fl", "gre", "fgre", "medic", "t2star", "swi", "ffe", "mge"} {
		if strings.HasPrefix(name, h) {
			return "GR"
		}
	}
	for _, h := range []string{"se", "tse", "fse", "mese", "cpmg", "me_se", "t2map"} {
		if strings.HasPrefix(name, h) {
			return "SE"
		}
	}
	return ""
}

// Lookup returns the series with the given ID; the SeriesInstanceUID or
// the series number are accepted too when they name exactly one series.
func (c *Catalog) Lookup(id string) (*Series, error) {
	for _, s := range c.Series {
		if s.ID == id {
			return s, nil
		}
	}
	var hits []*Series
	for _, s := range c.Series {
		if s.UID == id || strconv.Itoa(s.Number) == id && id != "0" {
			hits = append(hits, s)
		}
	}
	if len(hits) == 1 {
		return hits[0], nil
	}
	var ids []string
	for _, s := range c.Series {
		ids = append(ids, s.ID)
	}
	if len(hits) > 1 {
		return nil, fmt.Errorf("dicom: %q names %d series; choose one of %s", output.Line(id), len(hits), strings.Join(ids, ", "))
	}
	return nil, fmt.Errorf("dicom: no series %q in the scan (found %s)", output.Line(id), strings.Join(ids, ", "))
}

// Load reads the pixel data of the series with the given ID (see Lookup)
// and returns it as an image; see LoadSeries.
func (c *Catalog) Load(id string) (*volume.Image, error) {
	s, err := c.Lookup(id)
	if err != nil {
		return nil, err
	}
	return LoadSeries(s)
}

// Paths returns the files the series is read from, sorted, each once.
func (s *Series) Paths() []string {
	seen := map[string]bool{}
	var out []string
	for _, f := range s.frames {
		if p := f.file.raw.path; !seen[p] {
			seen[p] = true
			out = append(out, p)
		}
	}
	sort.Strings(out)
	return out
}

// fixedParams describes the parameters whose value is the same in every
// frame (TI, TR, TE, flip angle; unknown ones left out).
func fixedParams(frames []*frameInfo) string {
	var parts []string
	for _, p := range []struct {
		label, unit string
		get         func(*frameInfo) float64
	}{
		{"TI", " ms", func(f *frameInfo) float64 { return f.ti }},
		{"TR", " ms", func(f *frameInfo) float64 { return f.tr }},
		{"TE", " ms", func(f *frameInfo) float64 { return f.te }},
		{"FA", "°", func(f *frameInfo) float64 { return f.fa }},
	} {
		v := p.get(frames[0])
		if math.IsNaN(v) {
			continue
		}
		same := true
		for _, f := range frames[1:] {
			if quant(p.get(f)) != quant(v) {
				same = false
				break
			}
		}
		if same {
			parts = append(parts, p.label+" "+strconv.FormatFloat(v, 'g', -1, 64)+p.unit)
		}
	}
	return strings.Join(parts, ", ")
}
