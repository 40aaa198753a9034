package match

import (
	"testing"

	"ferry/register"
	"ferry/simulate"
	"ferry/status"
	"ferry/transform"
)

// fewLandmarksPoorZ is the default scenario with 20 landmarks and an in
// vivo z error of 6 µm (one standard deviation), on the cells and on the
// landmarks' source side alike.
func fewLandmarksPoorZ() simulate.Params {
	p := simulate.DefaultParams()
	p.VesselLandmarks, p.SomaLandmarks = 14, 6
	p.CellSDUM[2] = 6
	p.VesselSourceSDUM[2] = 6
	p.SomaSourceSDUM[2] = 6
	return p
}

// TestMatchedAreRightOnSimulatedData fits the transform of realistic
// simulated scenarios as a user would (check, set the flagged landmarks
// aside, fit) and checks the matches against the simulator's truth: of the
// cells called matched, at least minRight are matched to their true
// candidate (a cell outside the EM block that is matched counts as wrong),
// and the cells that lie outside the block by more than their 95 % radius
// are unmatched. The share of cells with a counterpart that are
// matched, and the coverage of r95 against the true positions, are logged.
func TestMatchedAreRightOnSimulatedData(t *testing.T) {
	if testing.Short() {
		t.Skip("fits six full scenarios")
	}
	for _, tc := range []struct {
		name     string
		params   simulate.Params
		minRight float64
	}{
		{"default", simulate.DefaultParams(), 0.995},
		{"20 landmarks, z sd 6 µm", fewLandmarksPoorZ(), 0.98},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var total tally
			for _, seed := range []uint64{1, 2, 3} {
				f := fitScenario(t, tc.params, seed, "")
				if f.fallback != nil {
					t.Logf("seed %d: %v; fitted %s instead", seed, f.fallback, f.model)
				}
				n, res := f.run(t, Options{})
				t.Logf("seed %d (%s, share with a counterpart %.3f): matched %d (%d right), ambiguous %d (%d right), unmatched %d; outside the block %d, of them unmatched %d; r95 coverage %.3f",
					seed, f.model, res[0].PriorCounterpart, n.matched, n.matchedRight, n.ambiguous, n.ambiguousRight, n.unmatched,
					n.outsideCell, n.outsideUnmatched, share(n.r95Inside, n.cells))
				for i, c := range f.sc.Cells {
					beyond := distanceOutside(f.sc.EMBlock, c.TrueTargetUM)
					if beyond > res[i].Mapped.R95 && res[i].Status != status.Unmatched {
						t.Errorf("seed %d: cell %s lies %.1f µm outside the EM block (r95 %.1f µm) and is %s", seed, c.ID, beyond, res[i].Mapped.R95, res[i].Status)
					}
				}
				total.add(n)
			}
			right := share(total.matchedRight, total.matched)
			t.Logf("all seeds: %.4f of matched cells right; %.4f of cells with a counterpart matched to it; r95 coverage %.3f",
				right, share(total.counterpartMatchedRight, total.withCounterpart), share(total.r95Inside, total.cells))
			if !(right >= tc.minRight) {
				t.Errorf("%.4f of matched cells are right, want ≥ %.3f", right, tc.minRight)
			}
		})
	}
}

// TestFindsCounterpartsOnExactMap checks the matching itself, apart from
// the registration: cells mapped by the simulator's true map, with the
// covariance their own localisation error carries through it. Then at least
// 97 % of the cells with a counterpart must be matched to it, and at least
// 99.5 % of the matched cells must be right.
func TestFindsCounterpartsOnExactMap(t *testing.T) {
	var total tally
	for _, seed := range []uint64{1, 2, 3} {
		sc, err := simulate.Generate(simulate.DefaultParams(), seed)
		if err != nil {
			t.Fatal(err)
		}
		n, _ := exactMapRun(t, sc)
		total.add(n)
	}
	right := share(total.matchedRight, total.matched)
	found := share(total.counterpartMatchedRight, total.withCounterpart)
	t.Logf("%.4f of matched cells right; %.4f of cells with a counterpart matched to it", right, found)
	if !(right >= 0.995) {
		t.Errorf("%.4f of matched cells are right, want ≥ 0.995", right)
	}
	if !(found >= 0.97) {
		t.Errorf("%.4f of cells with a counterpart are matched to it, want ≥ 0.97", found)
	}
}

// exactMapRun matches the cells of sc mapped through its true map.
func exactMapRun(t testing.TB, sc *simulate.Scenario) (tally, []Result) {
	t.Helper()
	sd := sc.Params.CellSDUM
	radii := register.NewRadiusTable(3, 0.95)
	mapped := make([]register.Mapped, len(sc.Cells))
	for i, c := range sc.Cells {
		j := sc.TrueJacobian(c.SourceUM)
		var d transform.Mat
		for k := range 3 {
			d[k][k] = sd[k] * sd[k]
		}
		cov := j.Mul(d).Mul(j.T())
		mapped[i] = register.Mapped{Pos: sc.TrueMap(c.SourceUM), Cov: cov, R95: radii.Radius(cov), Status: status.OK}
	}
	cands := make([]transform.Vec, len(sc.Candidates))
	for j, c := range sc.Candidates {
		cands[j] = c.TargetUM
	}
	opt, err := Options{}.withDefaults(len(mapped), len(cands))
	if err != nil {
		t.Fatal(err)
	}
	res, err := matchMapped(mapped, cands, opt)
	if err != nil {
		t.Fatal(err)
	}
	return score(sc, res), res
}

// distanceOutside is how far p lies outside the box, 0 inside.
func distanceOutside(b simulate.Box, p transform.Vec) float64 {
	var d transform.Vec
	for k := range 3 {
		d[k] = max(b.Min[k]-p[k], p[k]-b.Max[k], 0)
	}
	return d.Norm()
}
