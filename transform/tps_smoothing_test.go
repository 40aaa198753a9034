package transform

import (
	"fmt"
	"math"
	"testing"
)

// TestSmoothingPathMatchesFit checks the shared-work leave-one-out of
// SmoothingPath against Fit with LeaveOneOut at every smoothing, with and
// without pair weights (equal and unequal), in 2-D and 3-D, far from the
// origin and near it.
func TestSmoothingPathMatchesFit(t *testing.T) {
	for _, c := range []warpCase{
		{name: "3-D", dim: 3, n: 60, noise: 2},
		{name: "3-D weighted at 1e5 µm", dim: 3, n: 60, noise: 2, weighted: true, origin: 1e5},
		{name: "3-D minimum count", dim: 3, n: 5, noise: 2},
		{name: "2-D", dim: 2, n: 40, noise: 2},
		{name: "2-D weighted at 1e5 µm", dim: 2, n: 40, noise: 2, weighted: true, origin: 1e5},
	} {
		t.Run(c.name, func(t *testing.T) {
			src, dst, w := c.pairs(3)
			for _, weights := range [][]float64{w, equalWeightsFor(len(src))} {
				if weights == nil {
					continue
				}
				path, err := NewSmoothingPath(c.dim, src, dst, Options{Weights: weights})
				if err != nil {
					t.Fatal(err)
				}
				sms := []float64{0, 1e-3, 0.3, 3, 30, 300, 3e4}
				got, errs := path.LeaveOneOut(sms)
				for j, sm := range sms {
					res, err := Fit(TPS, c.dim, src, dst, Options{Smoothing: sm, Weights: weights, LeaveOneOut: true})
					if (err != nil) != (errs[j] != nil) {
						t.Fatalf("S=%g: Fit says %v, the path %v", sm, err, errs[j])
					}
					if err != nil {
						continue
					}
					for i := range src {
						if d := got[j][i].Sub(res.LOO[i]).Norm(); d > 1e-9*(1+res.LOO[i].Norm()) {
							t.Fatalf("S=%g pair %d: path %v, Fit %v µm", sm, i, got[j][i], res.LOO[i])
						}
					}
				}
			}
		})
	}
}

func equalWeightsFor(n int) []float64 {
	w := make([]float64, n)
	for i := range w {
		w[i] = 1.7
	}
	return w
}

// TestSmoothingPathRefusesAsFit checks that the path refuses, with Fit's
// words, what Fit with leave-one-out refuses: coincident sources at S = 0
// (but not at S > 0), too few pairs, a pair that alone fixes a direction.
func TestSmoothingPathRefusesAsFit(t *testing.T) {
	cube := []Vec{}
	for i := range 4 {
		for j := range 4 {
			x, y := float64(i)*100, float64(j)*100
			cube = append(cube, Vec{x, y, math.Mod(x*y, 170)})
		}
	}
	dup := append([]Vec(nil), cube...)
	dup[9] = dup[2]
	pivot := []Vec{{0, 0, 0}, {100, 0, 0}, {200, 0, 0}, {300, 0, 0}, {150, 90, 0}}
	for _, c := range []struct {
		name string
		dim  int
		src  []Vec
	}{
		{"3-D duplicate", 3, dup},
		{"3-D too few", 3, cube[:4]},
		{"2-D pivotal pair", 2, pivot},
	} {
		t.Run(c.name, func(t *testing.T) {
			dst := make([]Vec, len(c.src))
			for i, p := range c.src {
				dst[i] = p.Add(Vec{5, 3, 0})
			}
			sms := []float64{0, 5}
			path, perr := NewSmoothingPath(c.dim, c.src, dst, Options{})
			var errs []error
			if perr == nil {
				_, errs = path.LeaveOneOut(sms)
			}
			for j, sm := range sms {
				_, err := Fit(TPS, c.dim, c.src, dst, Options{Smoothing: sm, LeaveOneOut: true})
				got := perr
				if got == nil {
					got = errs[j]
				}
				if fmt.Sprint(err) != fmt.Sprint(got) {
					t.Errorf("S=%g: Fit says %v, the path %v", sm, err, got)
				}
			}
		})
	}
}

// BenchmarkSmoothingPath measures the leave-one-out of a 3-D spline at the
// 16 smoothings of the check's first pass, against BenchmarkSplineFitLOO's
// one fit.
func BenchmarkSmoothingPath(b *testing.B) {
	for _, n := range []int{300, 1000, 2000} {
		src, dst := benchLandmarks(n)
		sms := []float64{0}
		for e := -6.0; e <= 1.0; e += 0.5 {
			sms = append(sms, 100*math.Pow(10, e))
		}
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			for b.Loop() {
				path, err := NewSmoothingPath(3, src, dst, Options{})
				if err != nil {
					b.Fatal(err)
				}
				if _, errs := path.LeaveOneOut(sms); errs[1] != nil {
					b.Fatal(errs[1])
				}
			}
		})
	}
}

// TestSubsetPathMatchesSmoothingPath checks SubsetPath, the leave-one-out
// of subsets from one reduction of the whole set, against SmoothingPath of
// each subset: pairs deleted one at a time and several at once, in 2-D and
// 3-D, near the origin and far from it, at smoothings from interpolation
// to nearly affine. Every answer it vouches for must lie within the error
// it states, and that error must not be so loose that nothing could be
// decided by it.
func TestSubsetPathMatchesSmoothingPath(t *testing.T) {
	for _, c := range []warpCase{
		{name: "3-D", dim: 3, n: 80, noise: 2},
		{name: "3-D at 1e5 µm", dim: 3, n: 300, noise: 0.5, origin: 1e5},
		{name: "2-D", dim: 2, n: 60, noise: 2},
		{name: "2-D at 1e5 µm", dim: 2, n: 60, noise: 2, origin: 1e5},
	} {
		t.Run(c.name, func(t *testing.T) {
			src, dst, _ := c.pairs(5)
			dst[3][0] += 25
			dst[11][1] -= 20
			sp, err := NewSubsetPath(c.dim, src, dst, Options{})
			if err != nil {
				t.Fatal(err)
			}
			for _, del := range [][]int{nil, {3}, {3, 11}, {0, 3, 11, 20, 21, 40}} {
				keep := make([]bool, len(src))
				for i := range keep {
					keep[i] = true
				}
				for _, i := range del {
					keep[i] = false
				}
				var s2, d2 []Vec
				for i := range src {
					if keep[i] {
						s2, d2 = append(s2, src[i]), append(d2, dst[i])
					}
				}
				path, err := NewSmoothingPath(c.dim, s2, d2, Options{})
				if err != nil {
					t.Fatal(err)
				}
				sms := []float64{0, 1e-3, 0.3, 3, 30, 300, 3e4}
				got := sp.LeaveOneOut(keep, sms)
				want, errs := path.LeaveOneOut(sms)
				sure := 0
				for j, sm := range sms {
					if !got[j].Sure {
						continue
					}
					sure++
					if errs[j] != nil {
						t.Fatalf("deleted %v, S=%g: the subset path vouches for a system SmoothingPath refuses (%v)", del, sm, errs[j])
					}
					if got[j].RelErr > 1e-4 {
						t.Errorf("deleted %v, S=%g: stated error %.3g is too loose to decide anything", del, sm, got[j].RelErr)
					}
					for i := range want[j] {
						if d := got[j].LOO[i].Sub(want[j][i]).Norm(); d > got[j].RelErr*want[j][i].Norm() {
							t.Fatalf("deleted %v, S=%g pair %d: subset path %v, SmoothingPath %v µm (stated error %.3g)", del, sm, i, got[j].LOO[i], want[j][i], got[j].RelErr)
						}
					}
				}
				if sure < len(sms)-1 {
					t.Errorf("deleted %v: the path vouched for %d of %d smoothings", del, sure, len(sms))
				}
			}
		})
	}
	if _, err := NewSubsetPath(3, []Vec{{0, 0, 0}}, []Vec{{0, 0, 0}}, Options{Weights: []float64{1, 2}}); err == nil {
		t.Error("unequal weights or too few pairs: no error")
	}
}

// BenchmarkSubsetPath times the reduction of 1,000 and 2,000 pairs and one
// smoothing of a subset without five of them, what the check's sequential
// deletion asks at each step of its searches.
func BenchmarkSubsetPath(b *testing.B) {
	for _, n := range []int{1000, 2000} {
		src, dst := benchLandmarks(n)
		b.Run(fmt.Sprintf("reduce/n=%d", n), func(b *testing.B) {
			for b.Loop() {
				if _, err := NewSubsetPath(3, src, dst, Options{}); err != nil {
					b.Fatal(err)
				}
			}
		})
		sp, err := NewSubsetPath(3, src, dst, Options{})
		if err != nil {
			b.Fatal(err)
		}
		keep := make([]bool, n)
		for i := range keep {
			keep[i] = i%(n/5) != 7
		}
		b.Run(fmt.Sprintf("smoothing/n=%d", n), func(b *testing.B) {
			for b.Loop() {
				if r := sp.LeaveOneOut(keep, []float64{10}); !r[0].Sure {
					b.Fatal("not vouched for")
				}
			}
		})
	}
}
