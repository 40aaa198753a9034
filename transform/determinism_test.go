package transform

import (
	"fmt"
	"runtime"
	"testing"
)

// A spline fit with leave-one-out is the same to the last bit on one core
// and on several: the work split across cores must not regroup any sum.
// 400 pairs take the paths that split work by columns and that invert the
// Cholesky factor in two blocks.
func TestSplineFitSameOnAnyCores(t *testing.T) {
	src, dst := benchLandmarks(400)
	fit := func(procs int) string {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		res, err := Fit(TPS, 3, src, dst, Options{Smoothing: 0.5, LeaveOneOut: true})
		if err != nil {
			t.Fatal(err)
		}
		return fmt.Sprintf("%x %x %x", res.LOO, res.LOOFactor, res.Transform.(*Spline).Weights)
	}
	one := fit(1)
	for _, procs := range []int{2, 3, 4} {
		if fit(procs) != one {
			t.Errorf("GOMAXPROCS=%d gives other bits than GOMAXPROCS=1", procs)
		}
	}
}

// The smoothing path runs several smoothings at once: each must still be
// the same to the last bit whatever the number of cores.
func TestSmoothingPathSameOnAnyCores(t *testing.T) {
	src, dst := benchLandmarks(400)
	sms := []float64{0, 0.05, 0.5, 5, 50}
	run := func(procs int) string {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		p, err := NewSmoothingPath(3, src, dst, Options{})
		if err != nil {
			t.Fatal(err)
		}
		loo, errs := p.LeaveOneOut(sms)
		return fmt.Sprintf("%x %v", loo, errs)
	}
	one := run(1)
	for _, procs := range []int{2, 3} {
		if run(procs) != one {
			t.Errorf("GOMAXPROCS=%d gives other bits than GOMAXPROCS=1", procs)
		}
	}
}

// The exact refits behind a rigid motion's or a similarity's leave-one-out
// run on all cores, each writing only its own pair's error: 200 pairs are
// split across cores, and the bits must not change with their number.
func TestOrthogonalLOOSameOnAnyCores(t *testing.T) {
	src, dst := benchLandmarks(200)
	for _, kind := range []Kind{Rigid, Similarity} {
		fit := func(procs int) string {
			defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
			res, err := Fit(kind, 3, src, dst, Options{LeaveOneOut: true})
			if err != nil {
				t.Fatal(err)
			}
			if len(res.LOO) != len(src) {
				t.Fatalf("%v: %d leave-one-out errors for %d pairs", kind, len(res.LOO), len(src))
			}
			return fmt.Sprintf("%x", res.LOO)
		}
		one := fit(1)
		for _, procs := range []int{2, 3, 7} {
			if fit(procs) != one {
				t.Errorf("%v: GOMAXPROCS=%d gives other bits than GOMAXPROCS=1", kind, procs)
			}
		}
	}
}
