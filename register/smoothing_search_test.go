package register

import (
	"math"
	"math/rand/v2"
	"testing"

	"ferry/transform"
)

// TestWarmSmoothingSearchMatchesWhole checks that the smoothing search
// started from any point of the grid (as the check's later searches start
// from the previous one's best), and the first search of a check (every
// other point of the grid, then warm), choose the very S that the search
// of the whole grid chooses, on warps that want little, some and much smoothing,
// and that the warm start does answer without the whole grid on most of
// them (else the test would only exercise the fallback).
func TestWarmSmoothingSearchMatchesWhole(t *testing.T) {
	tests := []struct {
		name  string
		truth func(transform.Vec) transform.Vec
		n     int
		sd    transform.Vec
		bad   int
	}{
		{"affine", affineTruth, 40, transform.Vec{0.8, 0.8, 2.5}, 0},
		{"warped", warpedTruth, 60, transform.Vec{0.8, 0.8, 2.5}, 0},
		{"warped, exact", warpedTruth, 50, transform.Vec{}, 0},
		{"warped, noisy, one wrong", warpedTruth, 80, transform.Vec{2, 2, 4}, 1},
		{"bump", bumpedTruth, 70, transform.Vec{0.5, 0.5, 1}, 0},
	}
	answered, firstAnswered := 0, 0
	for i, tt := range tests {
		rng := rand.New(rand.NewPCG(uint64(i+1), 11))
		p := synthetic(rng, tt.n, tt.truth, tt.sd)
		for j := range tt.bad {
			p.Target[3+j][1] += 30
		}
		w := equalWeights(p.Len())
		whole := Settings{Smoothing: Smoothing{Auto: true}, fits: &fitCache{off: true}}
		want, err := chooseSmoothing(p, w, whole)
		if err != nil {
			t.Fatalf("%s: %v", tt.name, err)
		}
		first := Settings{Smoothing: Smoothing{Auto: true}, fits: newFitCache()}
		if got, err := chooseSmoothing(p, w, first); err != nil || math.Float64bits(got) != math.Float64bits(want) {
			t.Errorf("%s, a check's first search: S = %v (%v), the whole grid gives %v", tt.name, got, err, want)
		}
		coarse := &smoothingSearch{unit: kernelScale(p), cost: map[float64]float64{}}
		coarse.eval = func(sms []float64) []float64 { return smoothingCosts(t, p, w, sms) }
		if _, ok := coarse.coarse(); ok {
			firstAnswered++
		}
		for k := range smoothingGridLen {
			s := Settings{Smoothing: Smoothing{Auto: true}, fits: newFitCache()}
			s.fits.setSmoothingHint(k)
			got, err := chooseSmoothing(p, w, s)
			if err != nil {
				t.Fatalf("%s from grid point %d: %v", tt.name, k, err)
			}
			if math.Float64bits(got) != math.Float64bits(want) {
				t.Errorf("%s from grid point %d: S = %v, the whole grid gives %v", tt.name, k, got, want)
			}
			search := &smoothingSearch{unit: kernelScale(p), cost: map[float64]float64{}}
			search.eval = func(sms []float64) []float64 { return smoothingCosts(t, p, w, sms) }
			if _, ok := search.warm(k); ok {
				answered++
			}
		}
	}
	t.Logf("the warm start answered %d times of %d; the first search without the whole grid %d times of %d", answered, len(tests)*smoothingGridLen, firstAnswered, len(tests))
	if firstAnswered == 0 {
		t.Error("every first search fell back to the whole grid")
	}
	if answered < len(tests)*smoothingGridLen/3 {
		t.Errorf("the warm start answered %d times of %d: the fallback did nearly all the work", answered, len(tests)*smoothingGridLen)
	}
}

// smoothingCosts is chooseSmoothing's cost of each S: the weighted sum of
// squared leave-one-out errors, by full fits.
func smoothingCosts(t *testing.T, p *Problem, w []float64, sms []float64) []float64 {
	out := make([]float64, len(sms))
	for j, sm := range sms {
		res, err := transform.Fit(transform.TPS, p.Dim, p.Source, p.Target, transform.Options{Weights: w, Smoothing: sm, LeaveOneOut: true})
		if err != nil {
			out[j] = math.Inf(1)
			continue
		}
		for i, r := range res.LOO {
			out[j] += w[i] * r.Dot(r)
		}
	}
	return out
}

// BenchmarkSmoothingSearch times one smoothing search of 1,000 landmarks
// over the whole grid, as a check's first search (every other grid point,
// then a walk) and started from the grid's best (every later search of the
// check, the sets differing by a landmark or two). The figures go into
// docs/benchmarks.md.
func BenchmarkSmoothingSearch(b *testing.B) {
	rng := rand.New(rand.NewPCG(1000, 3))
	p := synthetic(rng, 1000, warpedTruth, transform.Vec{0.8, 0.8, 2.5})
	w := equalWeights(p.Len())
	first := Settings{Smoothing: Smoothing{Auto: true}, fits: newFitCache()}
	if _, err := chooseSmoothing(p, w, first); err != nil {
		b.Fatal(err)
	}
	hint, ok := first.fits.smoothingHint()
	if !ok {
		b.Fatal("the search chose S = 0: nothing to start from")
	}
	for _, c := range []struct {
		name  string
		cache func() *fitCache
	}{
		{"whole", func() *fitCache { return &fitCache{off: true} }},
		{"first", newFitCache},
		{"warm", func() *fitCache {
			c := newFitCache()
			c.setSmoothingHint(hint)
			return c
		}},
	} {
		b.Run(c.name, func(b *testing.B) {
			cpu0 := cpuSeconds()
			for b.Loop() {
				s := Settings{Smoothing: Smoothing{Auto: true}, fits: c.cache()}
				if _, err := chooseSmoothing(p, w, s); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric((cpuSeconds()-cpu0)/float64(b.N), "cpu_s/op")
		})
	}
}

// bumpedTruth is warpedTruth with a local displacement bump of 5 µm in x
// (a Gaussian of 60 µm sd at (250, 250, 150) µm): a warp with a bend that a
// smooth trend does not follow.
func bumpedTruth(x transform.Vec) transform.Vec {
	y := warpedTruth(x)
	d := x.Sub(transform.Vec{250, 250, 150})
	y[0] += 5 * math.Exp(-d.Dot(d)/(2*60*60))
	return y
}
