package suggest

import (
	"math/rand/v2"
	"sort"
	"testing"

	"ferry/landmarks"
	"ferry/register"
	"ferry/register/internal/families"
	"ferry/transform"
)

// p90 is the cells' 90th-percentile error (µm) after fitting p.
func familyP90(t *testing.T, s *families.Scenario, p *register.Problem) float64 {
	t.Helper()
	f, _ := fitFile(t, p, register.Settings{Smoothing: register.Smoothing{Auto: true}})
	var e []float64
	for _, c := range s.Cells {
		e = append(e, f.Transform.Apply(c.Source).Sub(c.Truth).Norm())
	}
	sort.Float64s(e)
	return e[int(0.9*float64(len(e)))]
}

// withLandmarks adds vessel landmarks at the source positions zs, their
// targets the truth with the scenario's picking noise.
func withLandmarks(s *families.Scenario, p *register.Problem, zs []transform.Vec, rng *rand.Rand) *register.Problem {
	q := *p
	q.IDs = append([]string(nil), p.IDs...)
	q.Kinds = append([]landmarks.Kind(nil), p.Kinds...)
	q.Source = append([]transform.Vec(nil), p.Source...)
	q.Target = append([]transform.Vec(nil), p.Target...)
	for i, z := range zs {
		y := s.Truth(z)
		src := z
		for k := range 3 {
			src[k] += rng.NormFloat64() * s.Spec.Noise.SourceVessel[k]
			y[k] += rng.NormFloat64() * s.Spec.Noise.TargetVessel[k]
		}
		q.IDs = append(q.IDs, "new"+string(rune('a'+i)))
		q.Kinds = append(q.Kinds, landmarks.KindVessel)
		q.Source = append(q.Source, src)
		q.Target = append(q.Target, y)
	}
	return &q
}

// TestFamiliesSuggestGain measures, on the clean scenarios of
// register/internal/families, how much five suggested landmarks lower the
// cells' 90th-percentile error against five placed at random in the block
// (the mean of three draws), and logs it for docs/error-model.md. Over the
// six sets the suggested ones must lower it more on average than random
// ones: the target of 10 % more is not met (docs/error-model.md).
func TestFamiliesSuggestGain(t *testing.T) {
	if testing.Short() {
		t.Skip("Monte Carlo over the families")
	}
	gainSuggested, gainRandom := 0.0, 0.0
	for _, spec := range families.Clean() {
		s := families.Draw(spec, 1)
		p := &register.Problem{Dim: 3, IDs: s.IDs, Kinds: s.Kind, Source: s.Source, Target: s.Target}
		before := familyP90(t, s, p)
		f, _ := fitFile(t, p, register.Settings{Smoothing: register.Smoothing{Auto: true}})
		cells := make([]transform.Vec, len(s.Cells))
		for i, c := range s.Cells {
			cells[i] = c.Source
		}
		res, err := Suggest(f, cells, Options{N: 5})
		if err != nil {
			t.Fatal(err)
		}
		var zs []transform.Vec
		for _, sg := range res.Suggestions {
			zs = append(zs, sg.Source)
		}
		rng := rand.New(rand.NewPCG(7, 7))
		suggested := familyP90(t, s, withLandmarks(s, p, zs, rng))
		random := 0.0
		for range 3 {
			var rz []transform.Vec
			for range 5 {
				rz = append(rz, transform.Vec{rng.Float64() * families.Block[0], rng.Float64() * families.Block[1], rng.Float64() * families.Block[2]})
			}
			random += familyP90(t, s, withLandmarks(s, p, rz, rng)) / 3
		}
		t.Logf("%-22s p90 %.2f µm; +5 suggested %.2f (%.1f %% lower); +5 random %.2f (%.1f %% lower)",
			spec.Name, before, suggested, 100*(before-suggested)/before, random, 100*(before-random)/before)
		gainSuggested += (before - suggested) / before / 6
		gainRandom += (before - random) / before / 6
	}
	t.Logf("mean over the six sets: suggested %.1f %% lower, random %.1f %% lower", 100*gainSuggested, 100*gainRandom)
	if gainSuggested <= gainRandom {
		t.Errorf("suggested landmarks lowered the cells' 90th-percentile error by %.1f %% on average, random ones by %.1f %%", 100*gainSuggested, 100*gainRandom)
	}
}
