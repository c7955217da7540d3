package preview_test

import (
	"fmt"

	"github.com/tauvox/tauvox/io/preview"
)

func ExampleForQuantity() {
	for _, q := range []string{"T1", "R1", "T2star", "R2*", "MWF", "M0"} {
		cm, rev := preview.ForQuantity(q)
		if rev {
			cm = cm.Reversed()
		}
		fmt.Printf("%-6s %-20s %s\n", q, cm.Name, preview.DefaultUnit(q))
	}
	// Output:
	// T1     plasma               ms
	// R1     plasma (reversed)    1/s
	// T2star viridis              ms
	// R2*    viridis (reversed)   1/s
	// MWF    cividis              fraction
	// M0     gray                 a.u.
}

func ExampleParseWindow() {
	w, err := preview.ParseWindow("0,2000")
	fmt.Println(w.Lo, w.Hi, err)
	_, err = preview.ParseWindow("2000,0")
	fmt.Println(err)
	// Output:
	// 0 2000 <nil>
	// range "2000,0": LO must be below HI
}
