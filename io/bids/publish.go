package bids

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/io/sidecar"
	"github.com/tauvox/tauvox/volume"
)

// Publication says how a fit of a collection is published in a
// derivative dataset.
type Publication struct {
	Collection *Collection
	Dir        string // the derivative folder of the collection
	// Stems are the map stems the fit wrote (T2map, T2map_sd, ...,
	// fitquality, status).
	Stems []string
	// Reference is the EstimationReference of the model ("" for none).
	Reference string
}

// Name returns the derivative file name of a stem of the publication.
func (p *Publication) Name(stem, ext string) string {
	c := p.Collection
	return DerivativeName(c.Base, c.Suffix, stem, ext)
}

// ProvenancePath is where the publication's provenance is written; a
// series counts as finished only when it exists.
func (p *Publication) ProvenancePath() string {
	return filepath.Join(p.Dir, p.Name("provenance", ".json"))
}

// Publish moves the maps of the fit output folder work (<stem>.nii.gz,
// <stem>.json and provenance.json, as tauvox's pipeline writes them) to
// their derivative names in p.Dir. Each sidecar gets Sources (BIDS URIs of
// the inputs), EstimationReference and the acquisition keys of im; the
// provenance gets the derivative names as outputs and the collection ID as
// bids_source, and is written last, so that a series counts as finished
// only when every file is in place.
func Publish(work string, p *Publication, im *volume.Image, inputs []series.Input) error {
	prov := p.ProvenancePath()
	if err := os.Remove(prov); err != nil && !errors.Is(err, os.ErrNotExist) {
		return err
	}
	var sources []string
	for _, in := range inputs {
		sources = append(sources, URI("raw", p.Collection.Root, in.Path))
	}
	keys := sidecar.Keys(im.Acq, im.Source.FieldStrength)
	var outputs []string
	for _, stem := range p.Stems {
		dst := p.Name(stem, ".nii.gz")
		if err := os.Rename(filepath.Join(work, stem+".nii.gz"), filepath.Join(p.Dir, dst)); err != nil {
			return err
		}
		b, err := os.ReadFile(filepath.Join(work, stem+".json"))
		if err != nil {
			return err
		}
		var meta map[string]any
		if err := json.Unmarshal(b, &meta); err != nil {
			return fmt.Errorf("%s.json: %v", stem, err)
		}
		meta["Sources"] = sources
		if p.Reference != "" {
			meta["EstimationReference"] = p.Reference
		}
		for k, v := range keys {
			meta[k] = v
		}
		side := p.Name(stem, ".json")
		if err := writeJSON(filepath.Join(p.Dir, side), meta); err != nil {
			return err
		}
		outputs = append(outputs, dst, side)
	}
	b, err := os.ReadFile(filepath.Join(work, "provenance.json"))
	if err != nil {
		return err
	}
	// The provenance keeps its fields in the pipeline's order: only
	// outputs is replaced and bids_source added.
	var fields orderedJSON
	if err := json.Unmarshal(b, &fields); err != nil {
		return fmt.Errorf("provenance.json: %v", err)
	}
	fields.set("outputs", outputs)
	fields.set("bids_source", p.Collection.ID())
	return writeJSON(prov, &fields)
}

func writeJSON(path string, v any) error {
	b, err := encodeJSON(v)
	if err != nil {
		return err
	}
	return output.WriteFile(path, b)
}

// encodeJSON indents v with two spaces, leaves <, > and & as they are, and
// ends with a newline.
func encodeJSON(v any) ([]byte, error) {
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetEscapeHTML(false)
	enc.SetIndent("", "  ")
	err := enc.Encode(v)
	return buf.Bytes(), err
}

// orderedJSON is a JSON object that keeps its keys in order.
type orderedJSON struct {
	keys []string
	vals map[string]json.RawMessage
}

func (o *orderedJSON) UnmarshalJSON(b []byte) error {
	dec := json.NewDecoder(bytes.NewReader(b))
	if t, err := dec.Token(); err != nil || t != json.Delim('{') {
		return errors.New("not a JSON object")
	}
	o.vals = map[string]json.RawMessage{}
	for dec.More() {
		t, err := dec.Token()
		if err != nil {
			return err
		}
		k, _ := t.(string)
		var v json.RawMessage
		if err := dec.Decode(&v); err != nil {
			return err
		}
		if _, dup := o.vals[k]; !dup {
			o.keys = append(o.keys, k)
		}
		o.vals[k] = v
	}
	return nil
}

func (o *orderedJSON) set(k string, v any) {
	b, _ := json.Marshal(v)
	if _, ok := o.vals[k]; !ok {
		o.keys = append(o.keys, k)
	}
	o.vals[k] = b
}

func (o *orderedJSON) MarshalJSON() ([]byte, error) {
	var buf bytes.Buffer
	buf.WriteByte('{')
	for i, k := range o.keys {
		if i > 0 {
			buf.WriteByte(',')
		}
		kb, _ := json.Marshal(k)
		buf.Write(kb)
		buf.WriteByte(':')
		buf.Write(o.vals[k])
	}
	buf.WriteByte('}')
	return buf.Bytes(), nil
}
