package qarun

import (
	"fmt"
	"io"
	"strings"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/roi/phantom"
)

// Summary writes the session's verdict as text to w: the session, where
// the phantom was found in each map, how the vials were told apart, and
// per vial the median, reference, deviation, tolerance and verdict.
func Summary(w io.Writer, qa *phantom.QA) {
	num := output.Num
	s := qa.Session
	cell := output.Cell
	fmt.Fprintf(w, "%s, %s %s, %g T, %g °C: %s\n", cell(s.Phantom), cell(s.Scanner), cell(strings.TrimSpace(s.Date+" "+s.Time)), s.Field, s.Temperature, strings.ToUpper(cell(qa.Verdict)))
	for _, sr := range qa.Series {
		l := sr.Localisation
		fmt.Fprintf(w, "  %s: phantom at (%.1f, %.1f, %.1f) mm, turned %.1f°, face %s, slice %d, geometric residual %s mm\n",
			sr.Quantity, l.Center[0], l.Center[1], l.Center[2], l.Rotation, map[bool]string{true: "down", false: "up"}[l.Mirrored], l.Slice, num(l.Residual, 2))
	}
	if id := qa.Identity; id != nil {
		for _, g := range id.Groups {
			line := fmt.Sprintf("  identity (%s): %s", strings.Join(g.Quantities, "+"), g.Status)
			if g.Z != nil {
				line += fmt.Sprintf(", %d placements measured, margin over the next %.1f × its noise spread (threshold %g)", g.Placements, *g.Z, id.Threshold)
			}
			if g.Reason != "" {
				line += "; " + cell(g.Reason)
			}
			fmt.Fprintln(w, line)
		}
	}
	fmt.Fprintf(w, "  %-5s %-3s %9s %9s %8s %6s  %s\n", "vial", "q", "median", "ref", "dev %", "tol", "verdict")
	for _, v := range qa.Vials {
		fmt.Fprintf(w, "  %-5s %-3s %9s %9s %8s %6s  %s\n", cell(v.ID), cell(v.Quantity), num(v.Median, 1), num(v.Reference, 1),
			num(v.Deviation, 2), num(v.Tolerance, 1), cell(v.Verdict))
	}
}
