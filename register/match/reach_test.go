package match

import (
	"math/rand/v2"
	"testing"

	"ferry/register"
	"ferry/transform"
)

// An EM export larger than the imaged field changes nothing: nuclei that no
// cell can reach neither move the estimated share of cells with a
// counterpart nor any match. The cells here straddle the face of the EM
// block (a third of them lie beyond it); the far nuclei, 2 mm away, would
// put them inside a grown volume if they counted.
func TestFarCandidatesChangeNothing(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	cands := lattice(150, 11)
	var mapped []register.Mapped
	one := mappedAt(transform.Vec{}, 2) // the radius table is slow to build: once
	for i := range 150 {
		var p transform.Vec
		if i%3 == 0 {
			// Beyond the block's face at x = 150 µm.
			p = transform.Vec{170 + 40*rng.Float64(), 150 * rng.Float64(), 150 * rng.Float64()}
		} else {
			p = cands[rng.IntN(len(cands))]
			for a := range 3 {
				p[a] += 1.5 * rng.NormFloat64()
			}
		}
		m := one
		m.Pos = p
		mapped = append(mapped, m)
	}
	near := runMapped(t, mapped, cands, Options{})
	far := append([]transform.Vec(nil), cands...)
	for range 2000 {
		far = append(far, transform.Vec{2000 + 300*rng.Float64(), 300 * rng.Float64(), 150 * rng.Float64()})
	}
	wide := runMapped(t, mapped, far, Options{})
	if near[0].PriorCounterpart != wide[0].PriorCounterpart {
		t.Errorf("share of cells with a counterpart %v with the far nuclei, %v without", wide[0].PriorCounterpart, near[0].PriorCounterpart)
	}
	for i := range near {
		a, b := near[i], wide[i]
		if a.Candidate != b.Candidate || a.Status != b.Status || a.PMatch != b.PMatch || a.RunnerUp != b.RunnerUp {
			t.Fatalf("cell %d: %s %d p %v without the far nuclei, %s %d p %v with them", i, a.Status, a.Candidate, a.PMatch, b.Status, b.Candidate, b.PMatch)
		}
	}
}
