package match

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"ferry/internal/parallel"
	"ferry/progress"
	"ferry/register"
	"ferry/status"
	"ferry/transform"
)

// The defaults of Options.
const (
	// DefaultCandidateSD (µm, per axis) is the offset between a candidate's
	// position and the in vivo soma centre that the mapping does not
	// account for: the offset of the EM nucleus centroid from the soma
	// centroid, which from common practice we recall to be of the order of
	// 1 µm per axis (the nucleus sits off centre, most in pyramidal cells),
	// and the error of picking or segmenting the nucleus, a few tenths of a
	// micrometre. 1.5 µm rounds their sum up on purpose: too small a value
	// makes matches overconfident, too large one only makes a few more of
	// them ambiguous.
	DefaultCandidateSD = 1.5
	// DefaultMinPMatch is the posterior probability from which a match is
	// clear. At 0.95 the runner-up and the no-match option together hold at
	// most 0.05, at most a nineteenth of the match.
	DefaultMinPMatch = 0.95
)

// Internal constants of the method, stated in docs/matching.md.
const (
	// reachP is the probability mass of the offset Gaussian inside the
	// search radius.
	reachP = 0.9999
	// densityNeighbours is k of the k-th-neighbour estimate of the local
	// density of candidates (relative error about 1/√(k−1), a quarter).
	densityNeighbours = 16
	// maxOptions bounds the candidates of one cell that enter the
	// assignment; the rest of those in reach only add to its normaliser.
	maxOptions = 64
	// minEdgeP drops options of negligible posterior from the assignment;
	// the private no-match option keeps every cell assignable.
	minEdgeP = 1e-9
	// minRunnerUpP is the least posterior probability of a runner-up worth
	// naming: one that shows in four decimals.
	minRunnerUpP = 1e-4
	// minBallShare bounds the edge correction of the density.
	minBallShare = 1e-3
	// priorMean and priorWeight make the Beta(18, 2) prior on the share of
	// cells with a counterpart, centred on 0.9 and worth 20 cells: enough to
	// steady the estimate from a handful of cells, little against hundreds.
	priorMean   = 0.9
	priorWeight = 20
	// maxPrior bounds the estimated share: at least one cell in a hundred
	// is taken to lack a detected counterpart, however clean the data
	// look, so that a lone candidate near a cell is never taken on faith.
	maxPrior = 0.99
	// spacingSample bounds the candidates whose nearest neighbour is
	// measured to find the typical spacing.
	spacingSample = 4096
)

// Options steer Match. The zero value of a field means its default.
type Options struct {
	// Dim is the dimension of the points, 2 or 3; zero means 3.
	Dim int
	// CandidateSD is the standard deviation per axis (µm) of a candidate's
	// position about the true target of its cell, beyond the mapping's own
	// uncertainty: the candidate's localisation error together with the
	// soma-to-nucleus offset. Zero means DefaultCandidateSD.
	CandidateSD float64
	// PriorCounterpart is the prior probability that a cell inside the
	// candidates' volume has a counterpart among them, in (0, 1). Zero
	// means it is estimated from the cells (see the package documentation).
	PriorCounterpart float64
	// MinPMatch is the posterior probability from which an assignment is
	// status.Matched, in (0.5, 1). Zero means DefaultMinPMatch.
	MinPMatch float64
	// Decisions, when not nil, are a person's verdicts by index into the
	// cells and candidates: an accepted cell is given its candidate (with
	// p_match 1), a cell with no counterpart none (p_none 1), and both are
	// taken out of the assignment; a rejected pair and a candidate accepted
	// for another cell are never chosen.
	Decisions *Decisions
	// CellIDs and CandidateIDs, when set, name the points; exact ties are
	// then broken by id, so the result does not depend on the order of the
	// rows. Without them ties go to the lower index.
	CellIDs, CandidateIDs []string
	// Progress, when not nil, hears how many cells have had their
	// candidates weighed: with many candidates that takes seconds.
	Progress progress.Reporter
}

// Result is the match of one cell.
type Result struct {
	// Candidate is the index of the assigned candidate, −1 when none.
	Candidate int
	// PMatch is the posterior probability of the choice: that Candidate is
	// the cell's counterpart or, when Candidate is −1, that the cell has no
	// counterpart among the candidates.
	PMatch float64
	// PNone is the posterior probability that the cell has no counterpart
	// among the candidates.
	PNone float64
	// DistanceUM is the distance from the mapped cell to Candidate or, when
	// it is −1, to the nearest candidate; NaN when there are none.
	DistanceUM float64
	// RunnerUp is the index of the likeliest candidate other than
	// Candidate, −1 when there is none with a probability of at least
	// 10⁻⁴, and PRunnerUp its posterior probability (0 when none).
	RunnerUp  int
	PRunnerUp float64
	Status    status.Status
	// Outside reports a cell mapped outside the candidates' volume by more
	// than its 95 % radius: it is unmatched whatever lies nearest.
	Outside bool
	// InReach is the number of candidates within the search radius.
	InReach int
	// Prior is the cell's prior probability of a counterpart among the
	// candidates: PriorCounterpart times the chance that its counterpart
	// lies inside the candidates' volume.
	Prior float64
	// PriorCounterpart is the share of cells inside the candidates' volume
	// taken to have a counterpart, as given or estimated; the same for
	// every cell.
	PriorCounterpart float64
	// Mapped is the cell's mapped position and uncertainty.
	Mapped register.Mapped
	// Decision is "accepted" or "none" when Options.Decisions settled the
	// cell, empty otherwise.
	Decision string
	// Options are the candidates weighed for the cell with their marginal
	// posterior probabilities under the one-to-one constraint, by
	// candidate index; those of negligible probability may be missing.
	Options []Option
}

// Option is one candidate of a cell and its posterior probability.
type Option struct {
	Candidate int
	P         float64
}

// Match maps each cell (source µm) with m and assigns it at most one of the
// candidates (target µm), no candidate to two cells. cellSD, when not nil,
// is the cells' own localisation error (µm per axis, one standard
// deviation), as for register.Mapper.Map. The method is described in the
// package documentation.
func Match(m *register.Mapper, cells []transform.Vec, cellSD *transform.Vec, cands []transform.Vec, opt Options) ([]Result, error) {
	if m == nil {
		return nil, errors.New("match: no mapper")
	}
	opt, err := opt.withDefaults(len(cells), len(cands))
	if err != nil {
		return nil, err
	}
	for i, p := range cells {
		if !p.IsFinite() {
			return nil, fmt.Errorf("match: cell %s has a position that is not finite", opt.cellName(i))
		}
	}
	for j, p := range cands {
		if !p.IsFinite() {
			return nil, fmt.Errorf("match: candidate %s has a position that is not finite", opt.candName(j))
		}
	}
	mapped := m.MapAll(cells, cellSD, false)
	return matchMapped(mapped, cands, opt)
}

// MatchMapped is Match of cells already mapped: each cell's position and
// covariance in the target are taken as given. A caller that corrects the
// mapped positions (refine, from the cells' neighbours) matches with it;
// the mapped cells' statuses (folded, say) count as in Match.
func MatchMapped(mapped []register.Mapped, cands []transform.Vec, opt Options) ([]Result, error) {
	opt, err := opt.withDefaults(len(mapped), len(cands))
	if err != nil {
		return nil, err
	}
	for i, mp := range mapped {
		if mp.Status != status.NoInverse && !mp.Pos.IsFinite() {
			return nil, fmt.Errorf("match: cell %s has a mapped position that is not finite", opt.cellName(i))
		}
	}
	for j, p := range cands {
		if !p.IsFinite() {
			return nil, fmt.Errorf("match: candidate %s has a position that is not finite", opt.candName(j))
		}
	}
	return matchMapped(mapped, cands, opt)
}

// matchReachable is Match of cells already mapped against candidates they
// can all reach; opt has its defaults.
func matchReachable(mapped []register.Mapped, cands []transform.Vec, opt Options) ([]Result, error) {
	if opt.Dim == 3 {
		flat := len(mapped) > 0
		for _, mp := range mapped {
			if mp.Cov[2][2] != 0 {
				flat = false
				break
			}
		}
		if flat {
			return nil, errors.New("match: the mapping has no z uncertainty: a 2-D transform needs Options.Dim = 2")
		}
	}

	// Candidates and cells in the order that breaks ties.
	candOrder := order(len(cands), opt.CandidateIDs)
	cellOrder := order(len(mapped), opt.CellIDs)
	ranked := make([]transform.Vec, len(cands))
	for r, j := range candOrder {
		ranked[r] = flatten(cands[j], opt.Dim)
	}
	sp := newSpace(ranked, opt)

	// Each cell's options, on all cores; every cell's are its own, so the
	// result is the same on any number of them.
	opts := make([]cellOptions, len(mapped))
	rep := progress.Of(opt.Progress)
	rep.Step(fmt.Sprintf("weighing %d candidates for %d cells", len(cands), len(mapped)), len(mapped))
	defer rep.Finish()
	// Blocks of 64 cells go to whichever core is free: a cell's cost
	// depends on how many candidates it reaches.
	parallel.Blocks(len(mapped), 64, func() struct{} { return struct{}{} }, func(_ struct{}, lo, hi int) {
		for r := lo; r < hi; r++ {
			opts[r] = sp.options(mapped[cellOrder[r]])
		}
		rep.Add(hi - lo)
	})

	if opt.Decisions.Len() > 0 {
		applyDecisions(opts, opt.Decisions, cellOrder, candOrder)
	}

	prior := opt.PriorCounterpart
	if prior == 0 {
		prior = estimatePrior(opts)
	}
	assoc := buildAssociation(opts, len(cands), prior)
	marg := assoc.posteriors()
	chosen, err := assign(assoc, marg)
	if err != nil {
		return nil, err
	}

	res := make([]Result, len(mapped))
	for r, i := range cellOrder {
		o := opts[r]
		out := Result{
			Candidate: -1, RunnerUp: -1, DistanceUM: math.NaN(),
			PNone: marg.none[r], Outside: o.outside, InReach: o.inReach, Mapped: mapped[i],
			Prior: prior * o.inside, PriorCounterpart: prior,
		}
		best, bestP := -1, 0.0
		for k := assoc.start[r]; k < assoc.start[r+1]; k++ {
			rank, p := assoc.rank[k], marg.edge[k]
			out.Options = append(out.Options, Option{Candidate: candOrder[rank], P: p})
			if rank == chosen[r] {
				out.Candidate = candOrder[rank]
				out.PMatch = p
				continue
			}
			if p > bestP && p >= minRunnerUpP {
				best, bestP = rank, p
			}
		}
		if best >= 0 {
			out.RunnerUp, out.PRunnerUp = candOrder[best], bestP
		}
		pos := flatten(mapped[i].Pos, opt.Dim)
		switch {
		case out.Candidate < 0:
			out.Status = status.Unmatched
			out.PMatch = out.PNone
			if _, d := sp.tree.nearest(pos); sp.tree.n > 0 {
				out.DistanceUM = d
			}
		default:
			out.DistanceUM = ranked[chosen[r]].Sub(pos).Norm()
			// A folded mapping is not one-to-one here: its position cannot
			// be trusted, so its match is never called clear.
			if out.PMatch >= opt.MinPMatch && mapped[i].Status != status.Folded {
				out.Status = status.Matched
			} else {
				out.Status = status.Ambiguous
			}
		}
		if j, ok := opt.Decisions.accepted(i); ok {
			out = Result{Candidate: j, PMatch: 1, RunnerUp: -1, Status: status.Matched, Decision: "accepted",
				DistanceUM: flatten(cands[j], opt.Dim).Sub(pos).Norm(), Outside: o.outside, InReach: o.inReach,
				Mapped: mapped[i], Prior: out.Prior, PriorCounterpart: prior}
		} else if opt.Decisions != nil && opt.Decisions.None[i] {
			out.Decision = "none"
		}
		res[i] = out
	}
	return res, nil
}

func (o Options) withDefaults(nCells, nCands int) (Options, error) {
	if o.Dim == 0 {
		o.Dim = 3
	}
	if o.Dim != 2 && o.Dim != 3 {
		return o, fmt.Errorf("match: dimension %d, want 2 or 3", o.Dim)
	}
	if o.CandidateSD == 0 {
		o.CandidateSD = DefaultCandidateSD
	}
	if !(o.CandidateSD > 0) || math.IsInf(o.CandidateSD, 0) {
		return o, fmt.Errorf("match: candidate standard deviation %v µm, want a positive number", o.CandidateSD)
	}
	if o.PriorCounterpart != 0 && !(o.PriorCounterpart > 0 && o.PriorCounterpart < 1) {
		return o, fmt.Errorf("match: prior probability of a counterpart %v, want a number in (0, 1)", o.PriorCounterpart)
	}
	if o.MinPMatch == 0 {
		o.MinPMatch = DefaultMinPMatch
	}
	if !(o.MinPMatch > 0.5 && o.MinPMatch < 1) {
		return o, fmt.Errorf("match: least probability of a match %v, want a number in (0.5, 1)", o.MinPMatch)
	}
	if o.CellIDs != nil && len(o.CellIDs) != nCells {
		return o, fmt.Errorf("match: %d cell ids for %d cells", len(o.CellIDs), nCells)
	}
	if o.CandidateIDs != nil && len(o.CandidateIDs) != nCands {
		return o, fmt.Errorf("match: %d candidate ids for %d candidates", len(o.CandidateIDs), nCands)
	}
	return o, nil
}

func (o Options) cellName(i int) string {
	if o.CellIDs != nil {
		return fmt.Sprintf("%q", o.CellIDs[i])
	}
	return fmt.Sprintf("%d", i+1)
}

func (o Options) candName(j int) string {
	if o.CandidateIDs != nil {
		return fmt.Sprintf("%q", o.CandidateIDs[j])
	}
	return fmt.Sprintf("%d", j+1)
}

// order is the permutation that sorts n items by id, stably; the identity
// without ids.
func order(n int, ids []string) []int {
	idx := make([]int, n)
	for i := range idx {
		idx[i] = i
	}
	if ids != nil {
		sort.SliceStable(idx, func(a, b int) bool { return ids[idx[a]] < ids[idx[b]] })
	}
	return idx
}

// flatten clears z in 2-D, where it means nothing.
func flatten(p transform.Vec, dim int) transform.Vec {
	if dim == 2 {
		p[2] = 0
	}
	return p
}
