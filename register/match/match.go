package match

import (
	"errors"
	"ferry/progress"
	"fmt"
	"math"
	"slices"
	"sort"

	"gonum.org/v1/gonum/mat"

	"ferry/internal/parallel"
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

// accepted is the candidate accepted for cell, if any.
func (d *Decisions) accepted(cell int) (int, bool) {
	if d == nil {
		return -1, false
	}
	j, ok := d.Accepted[cell]
	return j, ok
}

// applyDecisions takes the settled cells out of the assignment (no options:
// their no-match option then holds all their probability, and they weigh
// nothing in the prior) and strikes the forbidden candidates from the
// others' options, which is the posterior given that those pairs are not
// matches.
func applyDecisions(opts []cellOptions, d *Decisions, cellOrder, candOrder []int) {
	taken := map[int]bool{} // candidate indices accepted for some cell
	for _, j := range d.Accepted {
		taken[j] = true
	}
	for r, i := range cellOrder {
		o := &opts[r]
		if _, ok := d.Accepted[i]; ok || d.None[i] {
			*o = cellOptions{outside: o.outside, inReach: o.inReach}
			continue
		}
		rejected := d.Rejected[i]
		if len(taken) == 0 && len(rejected) == 0 {
			continue
		}
		ranks, ratios := o.ranks[:0], o.ratios[:0]
		for k, rank := range o.ranks {
			j := candOrder[rank]
			if _, no := slices.BinarySearch(rejected, j); no || taken[j] {
				continue
			}
			ranks, ratios = append(ranks, rank), append(ratios, o.ratios[k])
		}
		o.ranks, o.ratios = ranks, ratios
	}
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

// space is what every cell's options are computed against: the candidates
// (by rank), their tree and their volume.
type space struct {
	opt     Options
	dim     int
	cands   []transform.Vec
	tree    *candidateTree
	vol     volume
	reachK2 float64 // χ²_d quantile of reachP
}

func newSpace(ranked []transform.Vec, opt Options) *space {
	sp := &space{opt: opt, dim: opt.Dim, cands: ranked, reachK2: chiSquareQuantile(opt.Dim, reachP)}
	sp.tree = newCandidateTree(ranked, opt.Dim)
	if len(ranked) > 0 {
		sp.vol = newVolume(ranked, opt.Dim, typicalSpacing(sp.tree, ranked)/2)
	}
	return sp
}

// typicalSpacing is the median distance (µm) from a candidate to its nearest
// neighbour, over an evenly strided sample of at most spacingSample of them.
func typicalSpacing(t *candidateTree, pos []transform.Vec) float64 {
	if len(pos) < 2 {
		return 0
	}
	step := max(1, len(pos)/spacingSample)
	var d []float64
	for j := 0; j < len(pos); j += step {
		d = append(d, t.kthDistance(pos[j], 2))
	}
	slices.Sort(d)
	return d[len(d)/2]
}

// cellOptions are one cell's candidates in reach, kept to the likeliest
// maxOptions, with their likelihood ratios: the density of the offset from
// the cell over the density of candidates that are not its counterpart.
// inside is the chance that its counterpart lies inside the candidates'
// volume; rest sums the ratios of candidates in reach beyond the likeliest.
type cellOptions struct {
	ranks   []int
	ratios  []float64
	rest    float64
	inside  float64
	outside bool
	inReach int
}

// options weighs the candidates near one mapped cell.
func (sp *space) options(mp register.Mapped) cellOptions {
	var o cellOptions
	if sp.tree.n == 0 || mp.Status == status.NoInverse {
		return o
	}
	dim := sp.dim
	mu := flatten(mp.Pos, dim)
	// The offset of the counterpart from the mapped cell: the mapping's
	// covariance plus the candidate's own spread.
	s := mp.Cov
	for k := range dim {
		s[k][k] += sp.opt.CandidateSD * sp.opt.CandidateSD
	}
	g, ok := newGaussian(s, dim)
	if !ok {
		return o
	}

	// The chance that the counterpart lies inside the candidates' volume,
	// from the cell's signed depth and the spread of the offset across the
	// nearest face; none at all outside by more than the cell's 95 %
	// radius.
	depth, normal := sp.vol.depth(mu)
	if depth < -mp.R95 {
		o.outside = true
		return o
	}
	if sn := sqrt(quadratic(s, normal, dim)); sn > 0 {
		o.inside = 0.5 * math.Erfc(-depth/(sn*math.Sqrt2))
	} else if depth >= 0 {
		o.inside = 1
	}
	if o.inside == 0 {
		return o
	}

	// The density of candidates that are not this cell's counterpart:
	// k − 1 of the k nearest (the counterpart is likely one of them) over
	// the part of their ball inside the volume.
	k := min(densityNeighbours, sp.tree.n)
	rk := math.Max(sp.tree.kthDistance(mu, k), 1e-6)
	share := math.Max(ballShare(dim, rk, depth), minBallShare)
	density := float64(max(k-1, 1)) / (share * ballVolume(dim, rk))

	reach := math.Sqrt(g.maxEigen * sp.reachK2)
	near := sp.tree.within(mu, reach)
	o.inReach = len(near)
	type scored struct {
		rank  int
		ratio float64
	}
	all := make([]scored, 0, len(near))
	for _, nb := range near {
		d := sp.cands[nb.rank].Sub(mu)
		if r := math.Exp(g.logDensity(d)) / density; r > 0 {
			all = append(all, scored{nb.rank, r})
		}
	}
	if len(all) > maxOptions {
		sort.SliceStable(all, func(a, b int) bool { return all[a].ratio > all[b].ratio })
		for _, c := range all[maxOptions:] {
			o.rest += c.ratio
		}
		all = all[:maxOptions]
		sort.Slice(all, func(a, b int) bool { return all[a].rank < all[b].rank })
	}
	for _, c := range all {
		o.ranks = append(o.ranks, c.rank)
		o.ratios = append(o.ratios, c.ratio)
	}
	return o
}

// estimatePrior is the share π of cells inside the candidates' volume that
// have a counterpart among them, estimated from the cells themselves: the
// maximum a posteriori value of the marginal likelihood
//
//	Π_i (1 − π c_i + π c_i Λ_i),  Λ_i = Σ_j ψ_ij/ρ_i
//
// (c_i the chance that cell i's counterpart lies inside the volume, Λ_i
// the sum of its likelihood ratios; the one-to-one constraint is left out,
// which matters little for one number shared by all cells) under a
// Beta(18, 2) prior, and at most maxPrior. The log-posterior is concave in
// π, so its maximum is the one zero of its derivative, found by bisection.
func estimatePrior(opts []cellOptions) float64 {
	a := priorMean*priorWeight - 1
	b := (1-priorMean)*priorWeight - 1
	slope := func(pi float64) float64 {
		d := a/pi - b/(1-pi)
		for _, o := range opts {
			if o.inside == 0 {
				continue
			}
			lam := o.rest
			for _, r := range o.ratios {
				lam += r
			}
			x := o.inside * (lam - 1)
			d += x / (1 + pi*x)
		}
		return d
	}
	if slope(maxPrior) >= 0 {
		return maxPrior
	}
	lo, hi := 1e-6, maxPrior
	for range 100 {
		mid := 0.5 * (lo + hi)
		if slope(mid) > 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	return 0.5 * (lo + hi)
}

// gaussian is a zero-mean normal density of covariance S in dim dimensions.
type gaussian struct {
	dim      int
	inv      transform.Mat
	logNorm  float64
	maxEigen float64
}

func newGaussian(s transform.Mat, dim int) (gaussian, bool) {
	g := gaussian{dim: dim}
	sym := mat.NewSymDense(dim, nil)
	for i := range dim {
		for j := range dim {
			sym.SetSym(i, j, 0.5*(s[i][j]+s[j][i]))
		}
	}
	var eig mat.EigenSym
	if !eig.Factorize(sym, true) {
		return g, false
	}
	vals := eig.Values(nil)
	var vecs mat.Dense
	eig.VectorsTo(&vecs)
	logDet := 0.0
	for _, l := range vals {
		if !(l > 0) || math.IsInf(l, 0) {
			return g, false
		}
		logDet += math.Log(l)
		g.maxEigen = math.Max(g.maxEigen, l)
	}
	// S⁻¹ = V Λ⁻¹ Vᵀ.
	for i := range dim {
		for j := range dim {
			var x float64
			for k, l := range vals {
				x += vecs.At(i, k) * vecs.At(j, k) / l
			}
			g.inv[i][j] = x
		}
	}
	g.logNorm = -0.5 * (float64(dim)*math.Log(2*math.Pi) + logDet)
	return g, true
}

func (g gaussian) logDensity(d transform.Vec) float64 {
	return g.logNorm - 0.5*quadratic(g.inv, d, g.dim)
}

// quadratic is dᵀ A d over the first dim axes.
func quadratic(a transform.Mat, d transform.Vec, dim int) float64 {
	var q float64
	for i := range dim {
		for j := range dim {
			q += d[i] * a[i][j] * d[j]
		}
	}
	return q
}

// buildAssociation collects the cells' options (cells and candidates by
// rank) into one sparse table, with prior the share of cells with a
// counterpart.
func buildAssociation(opts []cellOptions, nCands int, prior float64) *association {
	a := &association{cells: len(opts), cands: nCands, start: make([]int, len(opts)+1),
		none: make([]float64, len(opts)), rest: make([]float64, len(opts))}
	for i, o := range opts {
		p := prior * o.inside
		for k, r := range o.ratios {
			a.rank = append(a.rank, o.ranks[k])
			a.weight = append(a.weight, p*r)
		}
		a.none[i], a.rest[i] = 1-p, p*o.rest
		a.start[i+1] = len(a.rank)
	}
	return a
}

// assign chooses for each cell (by rank) a candidate rank, or −1 for none,
// maximising the total log marginal probability of the choices with no
// candidate taken twice. Each cell has a no-match column of its own. The
// bipartite graph falls apart into connected components that are solved
// apart: they are small, since a cell reaches only candidates near it.
func assign(a *association, m marginals) ([]int, error) {
	kept := func(k int) bool { return m.edge[k] >= minEdgeP }
	chosen := make([]int, a.cells)
	local := map[int]int{}
	for _, rows := range a.components(kept) {
		if len(rows) == 1 && edgesOf(a, m, rows[0]) == 0 {
			chosen[rows[0]] = -1
			continue
		}
		// Columns: the component's candidates by rank, then each row's
		// no-match column.
		clear(local)
		var ranks []int
		for _, i := range rows {
			for k := a.start[i]; k < a.start[i+1]; k++ {
				if kept(k) {
					if _, ok := local[a.rank[k]]; !ok {
						local[a.rank[k]] = 0
						ranks = append(ranks, a.rank[k])
					}
				}
			}
		}
		slices.Sort(ranks)
		for c, r := range ranks {
			local[r] = c
		}
		p := &sparseProblem{rows: len(rows), cols: len(ranks) + len(rows), start: make([]int, len(rows)+1)}
		for r, i := range rows {
			for k := a.start[i]; k < a.start[i+1]; k++ {
				if kept(k) {
					p.col = append(p.col, local[a.rank[k]])
					p.cost = append(p.cost, -math.Log(m.edge[k]))
				}
			}
			p.col = append(p.col, len(ranks)+r)
			p.cost = append(p.cost, -math.Log(m.none[i]))
			p.start[r+1] = len(p.col)
		}
		cols, err := p.solve()
		if err != nil {
			return nil, err
		}
		for r, i := range rows {
			if c := cols[r]; c < len(ranks) {
				chosen[i] = ranks[c]
			} else {
				chosen[i] = -1
			}
		}
	}
	return chosen, nil
}

func edgesOf(a *association, m marginals, i int) int {
	n := 0
	for k := a.start[i]; k < a.start[i+1]; k++ {
		if m.edge[k] >= minEdgeP {
			n++
		}
	}
	return n
}
