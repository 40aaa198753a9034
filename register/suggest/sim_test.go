package suggest

import (
	"math/rand/v2"
	"testing"

	"ferry/register"
	"ferry/simulate"
	"ferry/transform"
)

// pickAt is the landmark pair a user would pick at the true source position
// p: the true map's target, and the scenario's vessel picking noise on both
// sides.
func pickAt(sc *simulate.Scenario, rng *rand.Rand, p transform.Vec) (src, dst transform.Vec) {
	sd := sc.Params.VesselSourceSDUM
	for k := range 3 {
		src[k] = p[k] + sd[k]*rng.NormFloat64()
	}
	dst = sc.TrueMap(p)
	for k := range 3 {
		dst[k] += sc.Params.VesselTargetSDUM * rng.NormFloat64()
	}
	return src, dst
}

// mappedError refits the assessment's model with its smoothing (kept
// fixed, as suggest keeps it) to the pairs, new ones of weight 1, and
// returns the median over the cells of the distance between the mapped true
// cell position and the cell's true target: the error of the map at the
// cells, which is what landmarks can change. (The cells' own localisation
// noise would add the same error whatever the landmarks.)
func mappedError(t *testing.T, sc *simulate.Scenario, a *register.Assessment, src, dst []transform.Vec) float64 {
	t.Helper()
	w := make([]float64, len(src))
	copy(w, a.Weights)
	for i := len(a.Weights); i < len(w); i++ {
		w[i] = 1
	}
	res, err := transform.Fit(a.Chosen, 3, src, dst, transform.Options{Weights: w, Smoothing: a.Smoothing})
	if err != nil {
		t.Fatal(err)
	}
	d := make([]float64, len(sc.Cells))
	for i, c := range sc.Cells {
		d[i] = res.Transform.Apply(c.TrueSourceUM).Sub(c.TrueTargetUM).Norm()
	}
	return medianOf(d)
}

// Five suggested landmarks, picked with true correspondences and realistic
// picking noise, lower the cells' actual mapped error more than five placed
// uniformly at random in the same box, on average over scenarios and noise
// draws (seeded: the test is deterministic). The scenarios span splines
// with little and much smoothing and affine fits.
func TestSuggestedBeatRandom(t *testing.T) {
	if testing.Short() {
		t.Skip("fits some hundred splines")
	}
	const k, draws = 5, 8
	for _, tc := range []struct {
		name   string
		params simulate.Params
		seeds  []uint64
	}{
		{"small scenarios", simulate.SmallParams(), []uint64{1, 2, 3, 4, 5, 6}},
		{"default scenarios", simulate.DefaultParams(), []uint64{1, 2, 3}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var dropSuggested, dropRandom float64
			n := 0
			for _, seed := range tc.seeds {
				sc, err := simulate.Generate(tc.params, seed)
				if err != nil {
					t.Fatal(err)
				}
				p := scenarioProblem(sc)
				f, a := fitFile(t, p, register.Settings{Smoothing: register.Smoothing{Auto: true}})
				cells := scenarioCells(sc)
				res, err := Suggest(f, cells, Options{N: k, CellSD: &sc.Params.CellSDUM})
				if err != nil {
					t.Fatal(err)
				}
				if len(res.Suggestions) != k {
					t.Fatalf("%d suggestions, asked for %d", len(res.Suggestions), k)
				}
				before := mappedError(t, sc, a, p.Source, p.Target)
				lo, hi := Bounds(3, p.Source, cells)
				for draw := range draws {
					rng := rand.New(rand.NewPCG(seed, uint64(draw)))
					src, dst := append([]transform.Vec(nil), p.Source...), append([]transform.Vec(nil), p.Target...)
					rsrc, rdst := append([]transform.Vec(nil), p.Source...), append([]transform.Vec(nil), p.Target...)
					for _, s := range res.Suggestions {
						ps, pd := pickAt(sc, rng, s.Source)
						src, dst = append(src, ps), append(dst, pd)
						var r transform.Vec
						for c := range 3 {
							r[c] = lo[c] + (hi[c]-lo[c])*rng.Float64()
						}
						ps, pd = pickAt(sc, rng, r)
						rsrc, rdst = append(rsrc, ps), append(rdst, pd)
					}
					dropSuggested += before - mappedError(t, sc, a, src, dst)
					dropRandom += before - mappedError(t, sc, a, rsrc, rdst)
					n++
				}
			}
			dropSuggested /= float64(n)
			dropRandom /= float64(n)
			t.Logf("mean drop of the cells' median mapped error: suggested %.3f µm, random %.3f µm", dropSuggested, dropRandom)
			if !(dropSuggested > dropRandom) {
				t.Errorf("suggested landmarks lowered the median mapped error by %.3f µm on average, random ones by %.3f µm", dropSuggested, dropRandom)
			}
		})
	}
}
