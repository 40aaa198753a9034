package register

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"ferry/transform"
)

// TestFitCacheReturnsOnlyTheSameFit checks that the check's fit cache
// answers only for the very inputs a fit was made from: the model, every
// coordinate, every weight and the smoothing asked for.
func TestFitCacheReturnsOnlyTheSameFit(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 5))
	p := synthetic(rng, 30, warpedTruth, transform.Vec{0.8, 0.8, 2.5})
	w := equalWeights(p.Len())
	s := Settings{Smoothing: Smoothing{Auto: true}, fits: newFitCache()}
	f, err := fitModel(p, transform.TPS, w, s)
	if err != nil {
		t.Fatal(err)
	}
	if g, _ := fitModel(p, transform.TPS, w, s); g != f {
		t.Fatal("the same inputs were fitted again")
	}
	moved := p.subset(func(int) bool { return true })
	moved.Target[7][2] += 1e-9
	w2 := append([]float64(nil), w...)
	w2[3] = 1.5
	for _, c := range []struct {
		name string
		kind transform.Kind
		p    *Problem
		w    []float64
		s    Settings
	}{
		{"other model", transform.Affine, p, w, s},
		{"a target moved", transform.TPS, moved, w, s},
		{"other weights", transform.TPS, p, w2, s},
		{"no weights", transform.TPS, p, nil, s},
		{"fixed smoothing", transform.TPS, p, w, Settings{Smoothing: Smoothing{Value: 3}, fits: s.fits}},
		{"fewer pairs", transform.TPS, p.subset(func(i int) bool { return i != 4 }), w[1:], s},
	} {
		if s.fits.get(c.kind, c.p, c.w, c.s) != nil {
			t.Errorf("%s: the cache answered", c.name)
		}
	}
}

// TestCheckSameWithCache checks that the check with its fit cache gives
// what it gives without one, to the last bit, on a set with wrong
// landmarks (the cache serves the clean set's fits again).
func TestCheckSameWithCache(t *testing.T) {
	rng := rand.New(rand.NewPCG(6, 7))
	p := synthetic(rng, 40, warpedTruth, transform.Vec{0.8, 0.8, 2.5})
	p.Target[5][0] += 30
	p.Target[17][1] -= 25
	s := Settings{Smoothing: Smoothing{Auto: true}, TargetSD: &transform.Vec{0.8, 0.8, 2.5}}
	with, err := Assess(p, s)
	if err != nil {
		t.Fatal(err)
	}
	// A cache that never answers: every fit made afresh.
	without, err := assessUncached(p, s)
	if err != nil {
		t.Fatal(err)
	}
	if len(with.Flagged()) == 0 {
		t.Fatal("no landmark flagged: the test does not reach the cached fits")
	}
	a, b := fmt.Sprintf("%v %v %x", with.Landmarks, with.Models, with.Result.LOO), fmt.Sprintf("%v %v %x", without.Landmarks, without.Models, without.Result.LOO)
	if a != b {
		t.Errorf("the check differs with its fit cache:\n%s\n%s", a, b)
	}
}

// assessUncached is Assess with every fit made afresh.
func assessUncached(p *Problem, s Settings) (*Assessment, error) {
	s.fits = &fitCache{off: true}
	return Assess(p, s)
}

// TestFlagsSameWithSubsetPath checks that the sequential deletion whose
// smoothing searches come from one reduction of the whole set
// (subsetFits, transform.SubsetPath) flags the same landmarks with the same
// numbers, to the last bit, as the deletion that fits every set afresh, on
// sets with several wrong landmarks, one wrong by little, and none.
func TestFlagsSameWithSubsetPath(t *testing.T) {
	tests := []struct {
		name  string
		truth func(transform.Vec) transform.Vec
		n     int
		sd    transform.Vec
		wrong []float64 // µm added along x to landmarks 7, 7+29, …
	}{
		{"warped, four wrong", warpedTruth, 160, transform.Vec{0.8, 0.8, 2.5}, []float64{30, -25, 20, 40}},
		{"bump, one barely wrong", bumpedTruth, 140, transform.Vec{0.5, 0.5, 1}, []float64{6}},
		{"affine, none wrong", affineTruth, 120, transform.Vec{0.8, 0.8, 2.5}, nil},
	}
	// Four landmarks off by 3 to 9 µm on noisy sets, about the threshold:
	// the decisions the fast answers may not take alone.
	for seed := range 5 {
		rng := rand.New(rand.NewPCG(uint64(seed), 99))
		var wrong []float64
		for range 4 {
			wrong = append(wrong, 3+6*rng.Float64())
		}
		tests = append(tests, struct {
			name  string
			truth func(transform.Vec) transform.Vec
			n     int
			sd    transform.Vec
			wrong []float64
		}{fmt.Sprintf("warped, noisy, four near the threshold (%d)", seed), warpedTruth, 130, transform.Vec{1.5, 1.5, 3}, wrong})
	}
	for i, tt := range tests {
		rng := rand.New(rand.NewPCG(uint64(i+1), 23))
		p := synthetic(rng, tt.n, tt.truth, tt.sd)
		for j, d := range tt.wrong {
			p.Target[7+29*j][0] += d
		}
		w := equalWeights(p.Len())
		radii := Radius95(p.Dim)
		fast := Settings{Smoothing: Smoothing{Auto: true}, fits: newFitCache()}
		if f, _, err := newSubsetFits(p, transform.TPS, w, fast).fit(p, func(int) bool { return true }); err != nil || f == nil {
			t.Fatalf("%s: the subset path gave no answer (%v): the test would not exercise it", tt.name, err)
		}
		fast.fits = newFitCache()
		got, err := flagLandmarks(p, transform.TPS, w, fast, radii)
		if err != nil {
			t.Fatal(err)
		}
		want, err := flagLandmarks(p, transform.TPS, w, Settings{Smoothing: Smoothing{Auto: true}, fits: &fitCache{off: true}}, radii)
		if err != nil {
			t.Fatal(err)
		}
		a := fmt.Sprintf("%v %q %x %v %x", got.flagged, got.reason, got.score, got.loo, got.r95)
		b := fmt.Sprintf("%v %q %x %v %x", want.flagged, want.reason, want.score, want.loo, want.r95)
		if a != b {
			t.Errorf("%s: the flags differ with the subset path:\n%s\n%s", tt.name, a, b)
		}
		t.Logf("%s: %d flagged", tt.name, len(want.loo))
		if len(tt.wrong) > 1 && len(want.loo) < 1 {
			t.Errorf("%s: %d flagged: the deletion did not run", tt.name, len(want.loo))
		}
	}
}
