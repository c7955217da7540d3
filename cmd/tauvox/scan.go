package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"strings"
	"text/tabwriter"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/io/dicom"
)

func runScan(_ context.Context, args []string, e *env) error {
	var asJSON, localizers, derived, keepIDs bool
	fs := newFlags("scan", "PATH... [--json]",
		`Finds every series under the paths — DICOM files recognised by content in
folders searched recursively, and NIfTI files with their BIDS sidecars — and
prints one row per series: id, description, what varies (TE, TI, flip angle,
TR) and its values, matrix, slices, volumes and a suggested model. Give the id
to 'tauvox fit PATH --series ID'. Files that cannot be read are listed with the
reason; the scan goes on with the rest.`, e)
	fs.BoolVar(&asJSON, "json", false, "machine-readable output")
	fs.BoolVar(&localizers, "localizers", false, "include localizer images")
	fs.BoolVar(&derived, "derived", false, "include derived images")
	fs.BoolVar(&keepIDs, "keep-identifiers", false, "show the patient name, ID, birth date and accession number of DICOM series (left out by default)")
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
		return err
	}
	if len(pos) == 0 {
		return errors.New("give at least one file or folder (see --help)")
	}
	for _, p := range pos {
		if _, err := os.Stat(p); err != nil {
			return err
		}
	}
	res, err := pipeline.Scan(pos, &dicom.ScanOptions{Localizers: localizers, Derived: derived, KeepIdentifiers: keepIDs})
	if err != nil {
		return err
	}
	if asJSON {
		b, _ := json.MarshalIndent(res, "", "  ")
		fmt.Fprintln(e.stdout, string(b))
		return nil
	}
	tw := tabwriter.NewWriter(e.stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "id\tdescription\tvaries\tvalues\tmatrix\tslices\tvolumes\tmodel\t")
	for _, s := range res.Series {
		model := s.Model
		if s.Problem != "" {
			model = "(cannot load: " + oneLine(s.Problem) + ")"
		}
		values := valueList(s.Values)
		if len(s.Values) == 0 && s.Fixed != "" {
			values = "(" + s.Fixed + ")"
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%dx%d\t%d\t%d\t%s\t\n", s.ID, clip(output.Printable(oneLine(s.Description)), 40), s.Varying, values,
			s.Matrix[0], s.Matrix[1], s.Slices, s.Volumes, model)
	}

	tw.Flush()
	protocols := 0
	for _, s := range res.Series {
		if len(s.Joins) > 0 {
			protocols++
			fmt.Fprintf(e.stdout, "  %s joins %d series: %s\n", s.ID, len(s.Joins), strings.Join(s.Joins, ", "))
		}
	}
	if protocols > 0 {
		fmt.Fprintf(e.stdout, "%d protocols split over several series (fit one with --series ID, or join series with --series A,B,C)\n", protocols)
	}
	fmt.Fprintf(e.stdout, "%d series; %d DICOM files, %d other files skipped, %d unreadable, %d localizer/derived left out\n",
		len(res.Series)-protocols, res.Files, res.Skipped, res.Unreadable, res.Ignored)
	for _, s := range res.Series {
		if id := s.Identifiers; id != nil {
			fmt.Fprintf(e.stdout, "  identifiers of %s: name %q, ID %q, birth date %q, accession %q\n", s.ID,
				id.PatientName, id.PatientID, id.PatientBirthDate, id.AccessionNumber)
		}
	}
	for _, p := range res.Problems {
		fmt.Fprintln(e.stdout, "  problem: "+output.Printable(oneLine(p.String())))
	}
	return nil
}

func clip(s string, n int) string {
	r := []rune(s)
	if len(r) > n {
		return string(r[:n-1]) + "…"
	}
	return s
}

func valueList(v []float64) string {
	if len(v) == 0 {
		return "-"
	}
	var parts []string
	for i, x := range v {
		if len(v) > 8 && i == 3 {
			parts = append(parts, "…")
			i = len(v) - 2
			parts = append(parts, fmt.Sprintf("%g", v[len(v)-2]), fmt.Sprintf("%g", v[len(v)-1]))
			break
		}
		parts = append(parts, fmt.Sprintf("%g", x))
	}
	return strings.Join(parts, ",")
}
