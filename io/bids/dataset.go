package bids

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
)

// ScanOptions are the settings of Scan.
type ScanOptions struct {
	// Suffixes are the file-collection suffixes to collect (MESE, VFA,
	// ...; tauvox batch takes them from the model registry). Required.
	Suffixes []string
	// Participants, when not empty, limits the walk to these subject
	// labels (without "sub-").
	Participants []string
}

// Dataset is the result of Scan.
type Dataset struct {
	Root        string
	Collections []*Collection
	// Notes are files left out on purpose (a phase part, a name that is
	// not BIDS) with the reason.
	Notes []string
}

// File is one image of a collection.
type File struct {
	Path  string
	Name  Name
	Index int // the echo-/inv-/flip-/mt- index; 0 for a single file
}

// Collection is one series of the dataset: the files that differ only in
// their index entity, in ascending index order.
type Collection struct {
	Root    string // dataset root
	Dir     string // folder of the files, relative to Root (sub-01/ses-1/anat)
	Base    Name   // the name without index and part entities, without extension
	Suffix  string // MESE, MEGRE, IRT1, VFA, ...
	Subject string
	Session string // "" when the dataset has no sessions
	Files   []File
}

// ID returns the collection's name relative to the dataset root, without
// extension: "sub-01/ses-1/anat/sub-01_ses-1_MESE".
func (c *Collection) ID() string {
	return filepath.ToSlash(filepath.Join(c.Dir, c.Base.String()))
}

// Scan walks the BIDS dataset at root and returns its collections sorted
// by ID. It fails when root is not a folder holding
// dataset_description.json, when an asked-for participant is missing, or
// when the files of a collection cannot be put in order (an index given
// twice, files with and without an index).
func Scan(root string, opt *ScanOptions) (*Dataset, error) {
	var o ScanOptions
	if opt != nil {
		o = *opt
	}
	if len(o.Suffixes) == 0 {
		return nil, errors.New("bids: Scan needs the suffixes to collect")
	}
	want := map[string]bool{}
	for _, s := range o.Suffixes {
		want[s] = true
	}
	if st, err := os.Stat(filepath.Join(root, "dataset_description.json")); err != nil || st.IsDir() {
		return nil, fmt.Errorf("%s: not a BIDS dataset (no dataset_description.json)", root)
	}
	subs, err := filepath.Glob(filepath.Join(root, "sub-*"))
	if err != nil {
		return nil, err
	}
	d := &Dataset{Root: root}
	found := map[string]bool{}
	pick := map[string]bool{}
	for _, p := range o.Participants {
		pick[strings.TrimPrefix(p, "sub-")] = true
	}
	groups := map[string]*Collection{}
	for _, sub := range subs {
		label := strings.TrimPrefix(filepath.Base(sub), "sub-")
		if st, err := os.Stat(sub); err != nil || !st.IsDir() || !alnum(label) {
			continue
		}
		if len(pick) > 0 && !pick[label] {
			continue
		}
		found[label] = true
		// sub-X/<datatype>/ and sub-X/ses-Y/<datatype>/
		dirs, _ := filepath.Glob(filepath.Join(sub, "*", "*.nii*"))
		more, _ := filepath.Glob(filepath.Join(sub, "ses-*", "*", "*.nii*"))
		for _, path := range append(dirs, more...) {
			if err := d.add(groups, path, want); err != nil {
				return nil, err
			}
		}
	}
	for p := range pick {
		if !found[p] {
			return nil, fmt.Errorf("%s: participant sub-%s not found", root, p)
		}
	}
	for _, c := range groups {
		if err := c.order(); err != nil {
			return nil, err
		}
		d.Collections = append(d.Collections, c)
	}
	sort.Slice(d.Collections, func(i, j int) bool { return d.Collections[i].ID() < d.Collections[j].ID() })
	sort.Strings(d.Notes)
	return d, nil
}

func (d *Dataset) add(groups map[string]*Collection, path string, want map[string]bool) error {
	file := filepath.Base(path)
	if !strings.HasSuffix(file, ".nii") && !strings.HasSuffix(file, ".nii.gz") {
		return nil
	}
	rel, err := filepath.Rel(d.Root, filepath.Dir(path))
	if err != nil {
		return err
	}
	n, err := ParseName(file)
	if err != nil {
		// Not our business unless it claims one of our suffixes.
		for s := range want {
			if strings.Contains(file, "_"+s+".nii") {
				d.Notes = append(d.Notes, err.Error())
			}
		}
		return nil
	}
	if !want[n.Suffix] {
		return nil
	}
	sub, _ := n.Get("sub")
	ses, _ := n.Get("ses")
	if part, ok := n.Get("part"); ok && part != "mag" {
		d.Notes = append(d.Notes, fmt.Sprintf("%s: part-%s left out (only magnitude images are fitted)", filepath.ToSlash(filepath.Join(rel, file)), part))
		return nil
	}
	f := File{Path: path, Name: n}
	for _, k := range indexKeys {
		if v, ok := n.Get(k); ok {
			i, err := strconv.Atoi(v)
			if err != nil || i < 0 {
				return fmt.Errorf("%s: %s-%s is not a non-negative integer index", path, k, v)
			}
			if f.Index != 0 {
				return fmt.Errorf("%s: more than one index entity (%s)", path, strings.Join(indexKeys, ", "))
			}
			f.Index = i
			if i == 0 {
				f.Index = -1 // index 0 is allowed; remember that one was given
			}
		}
	}
	base := n.Without(append([]string{"part"}, indexKeys...)...)
	base.Ext = ""
	key := filepath.Join(rel, base.String())
	c := groups[key]
	if c == nil {
		c = &Collection{Root: d.Root, Dir: filepath.ToSlash(rel), Base: base, Suffix: n.Suffix, Subject: sub, Session: ses}
		groups[key] = c
	}
	c.Files = append(c.Files, f)
	return nil
}

// order sorts the files by index and checks that they can be stacked.
func (c *Collection) order() error {
	idx := func(f File) int {
		if f.Index == -1 {
			return 0
		}
		return f.Index
	}
	sort.Slice(c.Files, func(i, j int) bool { return idx(c.Files[i]) < idx(c.Files[j]) })
	if len(c.Files) == 1 {
		return nil
	}
	for i, f := range c.Files {
		if f.Index == 0 {
			return fmt.Errorf("%s: %s has files with and without an index entity", c.ID(), filepath.Base(f.Path))
		}
		if i > 0 && idx(f) == idx(c.Files[i-1]) {
			return fmt.Errorf("%s: index %d given by both %s and %s", c.ID(), idx(f), filepath.Base(c.Files[i-1].Path), filepath.Base(f.Path))
		}
	}
	for i := range c.Files {
		if c.Files[i].Index == -1 {
			c.Files[i].Index = 0
		}
	}
	return nil
}
