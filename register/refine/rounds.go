package refine

import (
	"fmt"
	"sort"

	"ferry/register"
	"ferry/register/match"
	"ferry/status"
	"ferry/transform"
)

// choosePairs matches every soma under mapper and keeps the clear pairs:
// matched one to one with posterior probability at least threshold, the
// runner-up below 1 − threshold, the mapping not folded. With propose, a
// soma not proposed before whose neighbours agree that the fit maps it off
// is matched where they put it (constellation.go); proposed counts the
// pairs found so.
func (r *refiner) choosePairs(mapper *register.Mapper, threshold float64, propose bool) (pairs []Pair, proposed int, err error) {
	mapped := mapper.MapAll(r.in.Somata, r.opt.CellSD, false)
	var shift []transform.Vec
	var apply []bool
	if propose {
		shift, apply = r.localShifts(mapped)
		for i := range mapped {
			if apply[i] && !r.proposed[i] {
				mapped[i].Pos = mapped[i].Pos.Add(shift[i])
			} else {
				apply[i] = false
			}
		}
	}
	res, err := match.MatchMapped(mapped, r.candPos, match.Options{
		Dim: r.dim, CandidateSD: r.opt.CandidateSD, MinPMatch: threshold,
		CellIDs: r.in.SomaIDs, CandidateIDs: r.candIDs, Decisions: r.dec,
	})
	r.rep.Add(1)
	if err != nil {
		return nil, 0, err
	}
	for i, m := range res {
		// A decided soma is never a pair: accepted, it is a landmark
		// already; with no counterpart, it has none.
		if m.Decision != "" {
			continue
		}
		if m.Status != status.Matched || m.PMatch < threshold || m.PRunnerUp > 1-threshold {
			continue
		}
		if apply != nil && apply[i] {
			if r.proposed == nil {
				r.proposed = map[int]bool{}
			}
			r.proposed[i] = true
			proposed++
		}
		j := r.cand[m.Candidate]
		pairs = append(pairs, Pair{Soma: i, Candidate: j, P: m.PMatch,
			Source: r.in.Somata[i], Target: r.in.Candidates[j]})
	}
	return pairs, proposed, nil
}

// mapper builds the mapper that map and match would read from the
// transform file of fit (the landmark fit when nil).
func (r *refiner) mapper(fit *fitState) (*register.Mapper, error) {
	f := &register.Registration{Transform: r.a.Result.Transform, Uncertainty: r.base}
	if fit != nil {
		f.Transform, f.Uncertainty = fit.transform, fit.uncertainty
		raw, err := heldOutJSON(fit.heldOut)
		if err != nil {
			return nil, err
		}
		f.Refinement = raw
	}
	m, err := register.NewMapper(f)
	if err != nil {
		return nil, fmt.Errorf("refine: %w", err)
	}
	return m, nil
}

// sortPairs orders pairs by soma.
func sortPairs(pairs []Pair) {
	sort.Slice(pairs, func(i, j int) bool { return pairs[i].Soma < pairs[j].Soma })
}

// samePairs reports that two sets of pairs (soma to candidate) are equal.
func samePairs(a, b map[int]int) bool {
	if a == nil || b == nil || len(a) != len(b) {
		return false
	}
	for s, c := range a {
		if d, ok := b[s]; !ok || d != c {
			return false
		}
	}
	return true
}
