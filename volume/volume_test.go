package volume

import (
	"fmt"
	"math"
	"testing"
)

func TestAffineInverse(t *testing.T) {
	// Oblique affine with unequal voxel sizes; A·A⁻¹ must be the identity
	// (exact algebraic identity, common practice).
	a := Affine{{-0.8, 0.1, 0, 100}, {0, -0.5, 0.3, 120}, {0.05, 0, 2, 30}, {0, 0, 0, 1}}
	inv, ok := a.Inverse()
	if !ok {
		t.Fatal("affine reported singular")
	}
	p := a.Mul(&inv)
	id := Identity()
	for r := 0; r < 4; r++ {
		for c := 0; c < 4; c++ {
			if math.Abs(p[r][c]-id[r][c]) > 1e-12 {
				t.Fatalf("A·inv(A)[%d][%d] = %g", r, c, p[r][c])
			}
		}
	}
	if _, ok := (&Affine{}).Inverse(); ok {
		t.Error("zero affine reported invertible")
	}
}

func TestCountOverflow(t *testing.T) {
	if _, err := Count([4]int{1 << 40, 1 << 40, 1, 1}); err == nil {
		t.Error("overflowing grid accepted")
	}
	if _, err := Count([4]int{2, 0, 1, 1}); err == nil {
		t.Error("zero dimension accepted")
	}
	if n, err := Count([4]int{2, 3, 4, 5}); err != nil || n != 120 {
		t.Errorf("Count = %d, %v", n, err)
	}
}

func TestValidateAndIndex(t *testing.T) {
	im := New(3, 4, 5, 2)
	if err := im.Validate(); err != nil {
		t.Fatal(err)
	}
	if got := im.Index(2, 3, 4, 1); got != len(im.Data)-1 {
		t.Errorf("last index = %d", got)
	}
	im.Acq = make([]Acquisition, 3)
	if err := im.Validate(); err == nil {
		t.Error("acquisition count mismatch accepted")
	}
}

// TestVarying: the parameters that vary, most telling first, with their
// distinct values ascending; unknown values and differences below 1e-4
// are left out (common practice: headers round times to µs).
func TestVarying(t *testing.T) {
	n := math.NaN()
	acq := []Acquisition{
		{EchoTime: 10, InversionTime: 900, RepetitionTime: 3000, FlipAngle: 90},
		{EchoTime: 10.00001, InversionTime: 100, RepetitionTime: 2500, FlipAngle: 90},
		{EchoTime: n, InversionTime: 400, RepetitionTime: 3000, FlipAngle: 90},
	}
	v := Varying(acq)
	if len(v) != 2 || v[0].Name != "InversionTime" || v[1].Name != "RepetitionTime" ||
		fmt.Sprint(v[0].Values) != "[100 400 900]" || fmt.Sprint(v[1].Values) != "[2500 3000]" {
		t.Errorf("Varying = %+v", v)
	}
	if v := Varying(acq[:1]); len(v) != 0 {
		t.Errorf("one volume: %+v", v)
	}
}
