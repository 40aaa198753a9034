package suggest

import (
	"math"
	"math/rand/v2"
	"os"
	"sort"
	"strconv"
	"strings"
	"testing"

	"ferry/landmarks"
	"ferry/register"
	"ferry/register/internal/families"
	"ferry/transform"
)

// familyP90 is the cells' 90th-percentile error (µm) after fitting p, and
// that of the map alone: at the cells' true in vivo positions, without
// their own picking error, which no landmark lowers.
func familyP90(t *testing.T, s *families.Scenario, p *register.Problem) (cells, mapOnly float64) {
	t.Helper()
	f, _ := fitFile(t, p, register.Settings{Smoothing: register.Smoothing{Auto: true}})
	var e, m []float64
	for _, c := range s.Cells {
		e = append(e, f.Transform.Apply(c.Source).Sub(c.Truth).Norm())
		m = append(m, f.Transform.Apply(c.TrueSource).Sub(c.Truth).Norm())
	}
	sort.Float64s(e)
	sort.Float64s(m)
	return e[int(0.9*float64(len(e)))], m[int(0.9*float64(len(m)))]
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
// six sets the suggested ones must lower it, and the map's own error at the
// cells' true positions, at least 8 points more on average than random
// ones (docs/error-model.md records by how much).
func TestFamiliesSuggestGain(t *testing.T) {
	if testing.Short() {
		t.Skip("Monte Carlo over the families")
	}
	seeds := []uint64{1}
	if env := os.Getenv("FERRY_FAMILY_SEEDS"); env != "" {
		seeds = nil
		for _, f := range strings.Split(env, ",") {
			v, err := strconv.ParseUint(strings.TrimSpace(f), 10, 64)
			if err != nil {
				t.Fatalf("FERRY_FAMILY_SEEDS: %v", err)
			}
			seeds = append(seeds, v)
		}
	}
	gainSuggested, gainRandom := 0.0, 0.0
	mapSuggested, mapRandom := 0.0, 0.0
	sets := float64(len(seeds) * len(families.Clean()))
	for _, seed := range seeds {
		for _, spec := range families.Clean() {
			s := families.Draw(spec, seed)
			p := &register.Problem{Dim: 3, IDs: s.IDs, Kinds: s.Kind, Source: s.Source, Target: s.Target}
			before, mapBefore := familyP90(t, s, p)
			f := fieldFile(t, p)
			cells := make([]transform.Vec, len(s.Cells))
			for i, c := range s.Cells {
				cells[i] = c.Source
			}
			// A coarser grid than the default keeps the test short.
			lo, hi := Bounds(3, p.Source, cells)
			grid, _, err := Grid(3, lo, hi, 1000)
			if err != nil {
				t.Fatal(err)
			}
			res, err := Suggest(f, cells, Options{N: 5, Candidates: grid})
			if err != nil {
				t.Fatal(err)
			}
			// The radii before are map's.
			m, err := register.NewMapper(f)
			if err != nil {
				t.Fatal(err)
			}
			var r []float64
			for _, got := range m.MapAll(cells, nil, false) {
				r = append(r, got.R95)
			}
			if med := medianOf(r); math.Abs(med-res.R95Before) > 1e-9*med {
				t.Errorf("%s: median r95 before %v, map's %v", spec.Name, res.R95Before, med)
			}
			var zs []transform.Vec
			for _, sg := range res.Suggestions {
				zs = append(zs, sg.Source)
			}
			rng := rand.New(rand.NewPCG(7, 7))
			suggested, mapSug := familyP90(t, s, withLandmarks(s, p, zs, rng))
			random, mapRand := 0.0, 0.0
			for range 3 {
				var rz []transform.Vec
				for range 5 {
					rz = append(rz, transform.Vec{rng.Float64() * families.Block[0], rng.Float64() * families.Block[1], rng.Float64() * families.Block[2]})
				}
				c, m := familyP90(t, s, withLandmarks(s, p, rz, rng))
				random += c / 3
				mapRand += m / 3
			}
			t.Logf("%-20s/%d p90 %.2f µm; +%d suggested %.2f (%.1f %% lower); +5 random %.2f (%.1f %% lower); the map alone p90 %.2f µm, %.1f %% and %.1f %% lower",
				spec.Name, seed, before, len(zs), suggested, 100*(before-suggested)/before, random, 100*(before-random)/before,
				mapBefore, 100*(mapBefore-mapSug)/mapBefore, 100*(mapBefore-mapRand)/mapBefore)
			gainSuggested += (before - suggested) / before / sets
			gainRandom += (before - random) / before / sets
			mapSuggested += (mapBefore - mapSug) / mapBefore / sets
			mapRandom += (mapBefore - mapRand) / mapBefore / sets
		}
	}
	t.Logf("mean over the %d sets: suggested %.1f %% lower, random %.1f %% lower; the map alone: suggested %.1f %%, random %.1f %% lower",
		int(sets), 100*gainSuggested, 100*gainRandom, 100*mapSuggested, 100*mapRandom)
	// docs/error-model.md records 11.5 and 14.1 points more than random at
	// seed 1, 9.5 and 13.2 over seeds 1 to 3.
	if gainSuggested < gainRandom+0.08 || mapSuggested < mapRandom+0.08 {
		t.Errorf("suggested landmarks lowered the cells' 90th-percentile error by %.1f %% on average (the map's alone by %.1f %%), random ones by %.1f %% (%.1f %%): want 8 points more",
			100*gainSuggested, 100*mapSuggested, 100*gainRandom, 100*mapRandom)
	}
}

// fieldFile is the transform file fit writes, with its error model.
func fieldFile(t *testing.T, p *register.Problem) *register.Registration {
	t.Helper()
	s := register.Settings{Smoothing: register.Smoothing{Auto: true}}
	a, err := register.Assess(p, s)
	if err != nil {
		t.Fatal(err)
	}
	f := register.NewRegistration(p, a, s, register.Provenance{Command: "test"})
	return f
}
