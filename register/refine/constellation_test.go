package refine

import (
	"testing"

	"ferry/register"
	"ferry/transform"
)

// The constellation step (a local Hough vote over translations: Ballard
// 1981, Pattern Recognition 13(2):111–122) must find the offset that the
// neighbours share when the fit is off by more than its radius, and must not
// propose a wrong one where the fit is right.
func TestConstellationFindsTheNeighboursOffset(t *testing.T) {
	for _, tc := range []struct {
		name string
		// offset is the candidates' shift in 95 % radii of the landmark
		// fit (median over the cells), along x: beyond the fit's own
		// error, within the reach of the votes (constellationReach).
		offset     float64
		leastShare float64 // of the cells given an offset
	}{
		{"off by 1.8 radii", 1.8, 0.8},
		{"on target", 0, 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := newScenario(smallParams(warpPolynomial), 2)
			sd := s.Params.CellSD
			opt, err := Options{Settings: register.Settings{Smoothing: register.Smoothing{Auto: true}}, CellSD: &sd, CandidateSD: s.Params.NucleusSD}.withDefaults()
			if err != nil {
				t.Fatal(err)
			}
			a, err := register.Assess(s.Landmarks, opt.Settings)
			if err != nil {
				t.Fatal(err)
			}
			r := &refiner{in: s.input(), opt: opt, a: a, dim: 3, radii: register.Radius95(3)}
			r.base = register.NewUncertaintyModel(s.Landmarks, a, opt.Settings)
			r.candPos = s.Candidates
			mapper, err := r.mapper(nil)
			if err != nil {
				t.Fatal(err)
			}
			mapped := mapper.MapAll(s.Cells, &sd, false)
			var r95 []float64
			for _, m := range mapped {
				r95 = append(r95, m.R95)
			}
			offset := transform.Vec{tc.offset * quantile(r95, 0.5), 0, 0}
			for j := range s.Candidates {
				s.Candidates[j] = s.Candidates[j].Add(offset)
			}
			shift, apply := r.localShifts(mapped)
			applied, right := 0, 0
			for i := range mapped {
				if !apply[i] {
					continue
				}
				applied++
				// The offset that brings the cell onto its true position
				// in the shifted candidates' frame.
				need := s.CellTruth[i].Add(offset).Sub(mapped[i].Pos)
				if shift[i].Sub(need).Norm() <= 3 {
					right++
				}
			}
			share := float64(applied) / float64(len(mapped))
			t.Logf("offset %.1f µm: %d of %d cells given an offset, %d of them within 3 µm of the truth", offset[0], applied, len(mapped), right)
			if share < tc.leastShare {
				t.Errorf("%.2f of the cells given an offset, want at least %.2f", share, tc.leastShare)
			}
			if applied > 0 && float64(right) < 0.95*float64(applied) {
				t.Errorf("%d of %d offsets within 3 µm of the truth, want 95 %%", right, applied)
			}
		})
	}
}
