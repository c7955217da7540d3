package dicom_test

import (
	"fmt"
	"log"
	"path/filepath"

	"github.com/tauvox/tauvox/io/dicom"
)

// Scan a folder, list its series and load one of them.
func Example() {
	c, err := dicom.Scan([]string{filepath.Join("..", "..", "testdata", "dicom", "mix")}, nil)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("%d series, %d skipped, %d unreadable, %d left out\n", len(c.Series), c.Skipped, c.Unreadable, c.Ignored)
	for _, s := range c.Series {
		fmt.Printf("%-9s %-24q %s %v ms (%s), %d×%d×%d\n", s.ID, s.Description, s.Varying, s.Values, s.Echo, s.Columns, s.Rows, s.Slices)
	}
	im, err := c.Load(c.Series[0].ID)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(im.Dims, im.Source.Scanner, im.Source.AcquiredAt)
	// Output:
	// 2 series, 2 skipped, 1 unreadable, 3 left out
	// 3-cd6369  "T2 multi-echo oblique"  EchoTime [10 20 40 80] ms (SE), 16×12×4
	// 4-18180d  "T2star multi-echo gre"  EchoTime [3 8 13] ms (GR), 12×10×3
	// [16 12 4 4] BENCH-7 2024-05-21T09:15:00
}
