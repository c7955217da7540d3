package fit_test

import (
	"context"
	"fmt"
	"math"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/volume"
)

// Fit one voxel of a multi-echo spin-echo train with a per-worker fitter.
func ExampleModel() {
	m, err := fit.New(fit.Spec{Model: "t2"})
	if err != nil {
		panic(err)
	}
	acq := make([]volume.Acquisition, 8)
	y := make([]float64, 8)
	for i := range acq {
		acq[i] = volume.Unknown()
		acq[i].EchoTime = 10 * float64(i+1)
		y[i] = 1000 * math.Exp(-acq[i].EchoTime/80)
	}
	f, err := m.NewFitter(acq)
	if err != nil {
		panic(err)
	}
	res := fit.NewResult(m)
	f.Fit(res, y, fit.Covariates{})
	for k, p := range m.Outputs() {
		fmt.Printf("%s = %.4g %s\n", p.Name, res.Values[k], p.Unit)
	}
	fmt.Println(res.Status)
	// Output:
	// T2 = 80 ms
	// R2 = 12.5 1/s
	// M0 = 1000 arbitrary
	// ok
}

// Fit a whole series with the voxel-parallel engine.
func ExampleRun() {
	acq := make([]volume.Acquisition, 6)
	for i := range acq {
		acq[i] = volume.Unknown()
		acq[i].FlipAngle, acq[i].RepetitionTime = []float64{2, 5, 10, 15, 20, 30}[i], 15
	}
	const nv = 4 // four voxels of T1 500, 1000, 1500, 2000 ms
	im := &volume.Image{Dims: [4]int{nv, 1, 1, len(acq)}, Data: make([]float32, nv*len(acq)), Acq: acq}
	for v := 0; v < nv; v++ {
		for k, a := range acq {
			x := fit.Tissue{PD: 5000, T1: 500 * float64(v+1), T2: 1e9}
			im.Data[k*nv+v] = float32(fit.Signal(fit.SeqGradientEcho, x, 0, math.NaN(), a.RepetitionTime, a.FlipAngle, 0))
		}
	}
	m, _ := fit.New(fit.Spec{Model: "t1-vfa"})
	maps, err := fit.Run(context.Background(), im, m, &fit.Options{Workers: 2, NoThreshold: true})
	if err != nil {
		panic(err)
	}
	for v := 0; v < nv; v++ {
		fmt.Printf("T1 %.0f ms\n", maps.Values[0][v])
	}
	// Output:
	// T1 500 ms
	// T1 1000 ms
	// T1 1500 ms
	// T1 2000 ms
}

// The registry lists every model with its methods and the parameter that
// must vary.
func ExampleModels() {
	for _, m := range fit.Models() {
		fmt.Printf("%s: %v, varies %s\n", m.Name, m.Methods, m.Needs)
	}
	// Output:
	// t2: [nlls loglinear], varies EchoTime
	// t2star: [nlls loglinear arlo], varies EchoTime
	// t1-ir: [rdnls nlls], varies InversionTime
	// t1-vfa: [linear nlls], varies FlipAngle
	// t1-sr: [nlls], varies RepetitionTime
	// t1-ll: [rdnls], varies InversionTime
	// t2-epg: [nlls dictionary], varies EchoTime
	// t2-spectrum: [nnls], varies EchoTime
	// b1-dam: [ratio], varies FlipAngle
	// b1-afi: [ratio], varies RepetitionTime
}
