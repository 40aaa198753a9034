package match

import (
	"math"
	"slices"

	"gonum.org/v1/gonum/stat/distuv"

	"ferry/register"
	"ferry/status"
	"ferry/transform"
)

// matchMapped is Match of cells already mapped (opt has its defaults),
// against the candidates the cells can reach only.
//
// A candidate no cell can reach says nothing about any cell: not whether it
// is its counterpart, nor how dense the candidates are around it. But it
// would widen the candidates' volume, and cells beyond the EM block's real
// edge would then count as inside it with no counterpart in reach, which
// lowers the estimated share of cells with a counterpart and turns clear
// matches ambiguous. So only the candidates within the reach of at least
// one cell (the larger of its search radius and the radius of its
// density-neighbours, both as the full set gives them) take part, and an
// EM export larger than the imaged field changes nothing.
func matchMapped(mapped []register.Mapped, cands []transform.Vec, opt Options) ([]Result, error) {
	keep := reachable(mapped, cands, opt)
	if opt.Decisions != nil {
		// A candidate a person accepted takes part wherever it lies.
		for _, j := range opt.Decisions.Accepted {
			if _, found := slices.BinarySearch(keep, j); !found {
				keep = append(keep, j)
				slices.Sort(keep)
			}
		}
	}
	if len(keep) == len(cands) {
		return matchReachable(mapped, cands, opt)
	}
	sub := make([]transform.Vec, len(keep))
	for k, j := range keep {
		sub[k] = cands[j]
	}
	subOpt := opt
	subOpt.Decisions = opt.Decisions.subset(keep)
	if opt.CandidateIDs != nil {
		subOpt.CandidateIDs = make([]string, len(keep))
		for k, j := range keep {
			subOpt.CandidateIDs[k] = opt.CandidateIDs[j]
		}
	}
	res, err := matchReachable(mapped, sub, subOpt)
	if err != nil {
		return nil, err
	}
	// Back to the caller's indices; an unmatched cell's distance is to the
	// nearest of all the candidates, as documented.
	full := newCandidateTree(flattenAll(cands, opt.Dim), opt.Dim)
	for i := range res {
		r := &res[i]
		if r.Candidate >= 0 {
			r.Candidate = keep[r.Candidate]
		}
		if r.RunnerUp >= 0 {
			r.RunnerUp = keep[r.RunnerUp]
		}
		for o := range r.Options {
			r.Options[o].Candidate = keep[r.Options[o].Candidate]
		}
		if r.Candidate < 0 && r.Mapped.Status != status.NoInverse && full.n > 0 {
			_, r.DistanceUM = full.nearest(flatten(r.Mapped.Pos, opt.Dim))
		}
	}
	return res, nil
}

// reachable lists, in ascending order, the candidates within the reach of
// at least one mapped cell.
func reachable(mapped []register.Mapped, cands []transform.Vec, opt Options) []int {
	if len(cands) == 0 {
		return nil
	}
	flat := flattenAll(cands, opt.Dim)
	tree := newCandidateTree(flat, opt.Dim)
	k2 := chiSquareQuantile(opt.Dim, reachP)
	hit := make([]bool, len(cands))
	k := min(densityNeighbours, tree.n)
	for _, mp := range mapped {
		if mp.Status == status.NoInverse {
			continue
		}
		mu := flatten(mp.Pos, opt.Dim)
		s := mp.Cov
		for a := range opt.Dim {
			s[a][a] += opt.CandidateSD * opt.CandidateSD
		}
		r := tree.kthDistance(mu, k)
		if g, ok := newGaussian(s, opt.Dim); ok {
			r = math.Max(r, math.Sqrt(g.maxEigen*k2))
		}
		// A hair more, so that a candidate at exactly the radius is in.
		for _, nb := range tree.within(mu, r*(1+1e-9)+1e-9) {
			hit[nb.rank] = true
		}
	}
	var keep []int
	for j, h := range hit {
		if h {
			keep = append(keep, j)
		}
	}
	return keep
}

func flattenAll(pos []transform.Vec, dim int) []transform.Vec {
	out := make([]transform.Vec, len(pos))
	for i, p := range pos {
		out[i] = flatten(p, dim)
	}
	return out
}

// subset is d with candidate indices into keep (ascending indices of the
// full list) instead of the full list; a rejection of a candidate left out
// is dropped, since that candidate takes no part.
func (d *Decisions) subset(keep []int) *Decisions {
	if d == nil {
		return nil
	}
	at := func(j int) (int, bool) { return slices.BinarySearch(keep, j) }
	out := &Decisions{Accepted: map[int]int{}, None: d.None, Rejected: map[int][]int{}}
	for c, j := range d.Accepted {
		if k, ok := at(j); ok {
			out.Accepted[c] = k
		}
	}
	for c, js := range d.Rejected {
		var ks []int
		for _, j := range js {
			if k, ok := at(j); ok {
				ks = append(ks, k)
			}
		}
		if len(ks) > 0 {
			out.Rejected[c] = ks
		}
	}
	return out
}

// chiSquareQuantile is the p-quantile of the χ² distribution with k
// degrees of freedom.
func chiSquareQuantile(k int, p float64) float64 {
	return distuv.ChiSquared{K: float64(k)}.Quantile(p)
}
