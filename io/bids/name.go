package bids

import (
	"fmt"
	"strings"
)

// Entity is one key-label pair of a BIDS file name, such as sub-01.
type Entity struct {
	Key, Value string
}

// Name is a parsed BIDS file name: entities in the order written, the
// suffix and the extension (".nii.gz", ".json", ...; "" for none).
type Name struct {
	Entities []Entity
	Suffix   string
	Ext      string
}

// ParseName parses a file name (without folders) such as
// "sub-01_ses-1_echo-2_MESE.nii.gz". Every part but the last must be
// key-label with alphanumeric key and label, no key may repeat, and the
// suffix must be alphanumeric. A bare suffix ("MESE.json", a sidecar at
// the dataset root that applies to every MESE image) has no entities.
func ParseName(file string) (Name, error) {
	var n Name
	base := file
	if i := strings.IndexByte(base, '.'); i >= 0 {
		base, n.Ext = base[:i], base[i:]
	}
	parts := strings.Split(base, "_")
	seen := map[string]bool{}
	for _, p := range parts[:len(parts)-1] {
		k, v, ok := strings.Cut(p, "-")
		if !ok || !alnum(k) || !alnum(v) {
			return n, fmt.Errorf("%s: %q is not a key-label entity", file, p)
		}
		if seen[k] {
			return n, fmt.Errorf("%s: entity %s- given twice", file, k)
		}
		seen[k] = true
		n.Entities = append(n.Entities, Entity{k, v})
	}
	n.Suffix = parts[len(parts)-1]
	if !alnum(n.Suffix) {
		return n, fmt.Errorf("%s: suffix %q is not alphanumeric", file, n.Suffix)
	}
	return n, nil
}

func alnum(s string) bool {
	if s == "" {
		return false
	}
	for _, r := range s {
		if !(r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9') {
			return false
		}
	}
	return true
}

// Get returns the label of entity key and whether the name has it.
func (n Name) Get(key string) (string, bool) {
	for _, e := range n.Entities {
		if e.Key == key {
			return e.Value, true
		}
	}
	return "", false
}

// String formats the name: entities joined by "_", the suffix and the
// extension.
func (n Name) String() string {
	var b strings.Builder
	for _, e := range n.Entities {
		b.WriteString(e.Key + "-" + e.Value + "_")
	}
	return b.String() + n.Suffix + n.Ext
}

// Without returns a copy of n without the entities whose keys are given.
func (n Name) Without(keys ...string) Name {
	out := Name{Suffix: n.Suffix, Ext: n.Ext}
	for _, e := range n.Entities {
		drop := false
		for _, k := range keys {
			drop = drop || e.Key == k
		}
		if !drop {
			out.Entities = append(out.Entities, e)
		}
	}
	return out
}

// With returns a copy of n with entity key set to value, placed in the
// order of the BIDS entity table (entityOrder); an entity not in the table
// goes last.
func (n Name) With(key, value string) Name {
	out := n.Without(key)
	out.Entities = append([]Entity(nil), out.Entities...)
	rank := func(k string) int {
		for i, o := range entityOrder {
			if o == k {
				return i
			}
		}
		return len(entityOrder)
	}
	at := len(out.Entities)
	for i, e := range out.Entities {
		if rank(e.Key) > rank(key) {
			at = i
			break
		}
	}
	out.Entities = append(out.Entities[:at], append([]Entity{{key, value}}, out.Entities[at:]...)...)
	return out
}

// subsetOf reports whether every entity of n appears with the same label
// in m.
func (n Name) subsetOf(m Name) bool {
	for _, e := range n.Entities {
		if v, ok := m.Get(e.Key); !ok || v != e.Value {
			return false
		}
	}
	return true
}

// entityOrder is the order of entities in BIDS file names (BIDS
// specification, appendix "Entity table"; the subset a derivative of an
// anatomical qMRI series can carry, from memory of the table).
var entityOrder = []string{"sub", "ses", "sample", "task", "tracksys", "acq", "nuc", "voi", "ce", "trc", "stain", "rec", "dir", "run",
	"mod", "echo", "flip", "inv", "mt", "part", "proc", "hemi", "space", "split", "recording", "chunk", "seg", "res", "den", "label", "desc"}

// indexKeys are the entities that link the files of a qMRI file
// collection (check-values §3.6: echo for MESE/MEGRE, inv for IRT1, flip
// for VFA, mt for MTS/MPM).
var indexKeys = []string{"echo", "inv", "flip", "mt"}
