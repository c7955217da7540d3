package qarun

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"time"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/roi/phantom"
	"github.com/tauvox/tauvox/volume"
)

// Config is one QA session to assess.
type Config struct {
	// Def is a phantom definition file (tauvox-phantom/1), or "demo" for
	// the built-in definition of the invented demo phantom.
	Def string
	// Maps are fit output folders or T1map/T2map files.
	Maps []string
	// Options go to phantom.Assess. Options.Session holds what the user
	// gave: an empty Scanner, Date or Time and a NaN Field are taken from
	// the maps' provenance (an unknown scanner becomes "unknown"; an
	// unknown date or field is an error). Assess sets Options.Caution.
	Options phantom.Options
}

// Session is an assessed QA session: the result, the maps it measured and
// the definition it judged them by.
type Session struct {
	QA     *phantom.QA
	Result *phantom.Result
	Inputs []phantom.Input
	Def    *phantom.Definition
}

var (
	dateRE  = regexp.MustCompile(`^\d{4}-\d{2}-\d{2}$`)
	clockRE = regexp.MustCompile(`^\d{2}:\d{2}$`)
)

// Assess reads the definition and the maps, completes the session and
// runs phantom.Assess.
func Assess(c *Config) (*Session, error) {
	var def *phantom.Definition
	if c.Def == "demo" {
		def = phantom.Demo()
	} else {
		var err error
		if def, err = phantom.Read(c.Def); err != nil {
			return nil, err
		}
	}
	var inputs []phantom.Input
	sess := c.Options.Session
	for _, p := range c.Maps {
		ins, prov, err := Inputs(p)
		if err != nil {
			return nil, err
		}
		if prov != nil {
			if sess.Scanner == "" {
				sess.Scanner = prov.Scanner
			}
			if t, ok := parseAcquired(prov.Acquired); ok {
				if sess.Date == "" {
					sess.Date = t.Format("2006-01-02")
				}
				if sess.Time == "" {
					sess.Time = t.Format("15:04")
				}
			}
			if math.IsNaN(sess.Field) && prov.Field != nil {
				sess.Field = *prov.Field
			}
		}
		inputs = append(inputs, ins...)
	}
	if len(inputs) == 0 {
		return nil, fmt.Errorf("%s: no T1map or T2map found", strings.Join(c.Maps, ", "))
	}
	switch {
	case sess.Date == "":
		return nil, errors.New("session date unknown: give --date YYYY-MM-DD")
	case !dateRE.MatchString(sess.Date):
		return nil, fmt.Errorf("--date %q: want YYYY-MM-DD", sess.Date)
	case sess.Time != "" && !clockRE.MatchString(sess.Time):
		return nil, fmt.Errorf("--time %q: want HH:MM", sess.Time)
	case math.IsNaN(sess.Field):
		return nil, errors.New("field strength unknown: give --field")
	}
	if _, err := time.Parse("2006-01-02", sess.Date); err != nil {
		return nil, fmt.Errorf("--date %q is not a calendar date", sess.Date)
	}
	if sess.Scanner == "" {
		sess.Scanner = "unknown"
	}
	opt := c.Options
	opt.Session, opt.Caution = sess, output.Caution
	res, err := phantom.Assess(def, inputs, &opt)
	if err != nil {
		return nil, err
	}
	return &Session{QA: res.QA, Result: res, Inputs: inputs, Def: def}, nil
}

// Inputs reads the T1 and T2 maps (with their status and M0 map) of a fit
// output folder, or a single T1map or T2map file with the maps beside it,
// and the folder's provenance (nil when it has none).
func Inputs(p string) ([]phantom.Input, *mapset.Provenance, error) {
	st, err := os.Stat(p)
	if err != nil {
		return nil, nil, err
	}
	var folder *mapset.Folder
	var only string
	if st.IsDir() {
		if folder, err = mapset.Open(p); err != nil {
			return nil, nil, err
		}
	} else {
		base := filepath.Base(p)
		for _, q := range []string{"T1", "T2"} {
			if strings.HasPrefix(base, q+"map.nii") {
				only = q
			}
		}
		if only == "" {
			return nil, nil, fmt.Errorf("%s: not a T1map or T2map file", p)
		}
		if folder, err = mapset.Open(filepath.Dir(p)); err != nil {
			return nil, nil, err
		}
		folder.Maps[only+"map"] = p
	}
	var out []phantom.Input
	for _, q := range []string{"T1", "T2"} {
		path, ok := folder.Maps[q+"map"]
		if !ok || (only != "" && q != only) {
			continue
		}
		m, err := nifti.Read(path)
		if err != nil {
			return nil, nil, err
		}
		if m.Volumes() != 1 {
			return nil, nil, fmt.Errorf("%s: a map must hold one volume, not %d", path, m.Volumes())
		}
		in := phantom.Input{Quantity: q, Map: m, Ref: phantom.SeriesRef{Map: mapset.FinalPath(path)}}
		if in.Status, err = folder.Status(m); err != nil {
			return nil, nil, err
		}
		if mp, ok := folder.Maps["M0map"]; ok {
			l, err := nifti.Read(mp)
			if err != nil {
				return nil, nil, err
			}
			if !volume.SameGrid(l, m, 1e-3) {
				return nil, nil, fmt.Errorf("%s: M0 map and %s lie on different grids", mp, path)
			}
			in.Locator = l
		}
		if pr := folder.Provenance; pr != nil {
			in.Ref.Model, in.Ref.Method = pr.Model, pr.Method
			in.Ref.Description = pr.Series
			for _, pp := range pr.Protocol {
				in.Ref.Protocol = append(in.Ref.Protocol, phantom.Protocol{TE: pp.TE, TI: pp.TI, TR: pp.TR, FA: pp.FA})
			}
			for _, ip := range pr.Inputs {
				in.Ref.Inputs = append(in.Ref.Inputs, phantom.FileRef{Path: ip.Path, Role: ip.Role, SHA256: ip.SHA256})
			}
		}
		out = append(out, in)
	}
	return out, folder.Provenance, nil
}

// parseAcquired reads an acquisition date-time as sidecars and DICOM
// readers give it (RFC 3339, or without a zone, with optional fractions).
func parseAcquired(s string) (time.Time, bool) {
	for _, layout := range []string{time.RFC3339Nano, "2006-01-02T15:04:05.999999999", "2006-01-02T15:04:05", "2006-01-02T15:04", "2006-01-02"} {
		if t, err := time.Parse(layout, s); err == nil {
			return t, true
		}
	}
	return time.Time{}, false
}
