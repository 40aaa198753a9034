package match

import (
	"math"
)

// association is the sparse table of the cells' options: for cell i, the
// candidates of edges [start[i], start[i+1]) with their likelihood ratios,
// and the weights of its no-match option and of the candidates in reach
// left out of the table.
type association struct {
	cells, cands int
	start        []int
	rank         []int     // candidate rank of each edge, ascending within a cell
	weight       []float64 // likelihood ratio of each edge, ψ_ij
	none         []float64 // weight of each cell's no-match option, ψ_i0
	rest         []float64 // weight of candidates in reach beyond the table
}

// marginals are the posterior probabilities of the options under the
// one-to-one constraint: of each edge, and of each cell's no-match option.
type marginals struct {
	edge       []float64
	none       []float64
	iterations int
	converged  bool
}

// The stopping rule of the belief propagation: the largest change of a
// message below bpTolerance, or bpMaxIterations sweeps. exactStates bounds
// the joint assignments of a connected component whose marginals are
// summed exactly instead.
const (
	bpTolerance     = 1e-10
	bpMaxIterations = 1000
	exactStates     = 1 << 16
)

// posteriors are the marginals of every option: exact, by summing over the
// joint assignments, on each connected component of the graph small enough
// for it, which is nearly all of them where cells are sparse among the
// candidates; by belief propagation on the others.
func (a *association) posteriors() marginals {
	m := a.marginalise()
	used := make([]bool, a.cands)
	for _, cells := range a.components(func(int) bool { return true }) {
		states := 1.0
		for _, i := range cells {
			states *= float64(a.start[i+1] - a.start[i] + 2)
		}
		if len(cells) > 1 && states <= exactStates {
			a.exact(cells, &m, used)
		}
	}
	return m
}

// exact replaces the marginals of the cells of one component by the sums
// over all its joint assignments: each cell takes no match, one of the
// candidates in reach beyond its table (rest) or one of its candidates, no
// candidate twice. used is scratch, all false.
func (a *association) exact(cells []int, m *marginals, used []bool) {
	edge := map[int]float64{}
	none := make([]float64, len(cells))
	choice := make([]int, len(cells)) // edge index, −1 no match, −2 rest
	total := 0.0
	var walk func(c int, w float64)
	walk = func(c int, w float64) {
		if c == len(cells) {
			total += w
			for n, k := range choice {
				switch {
				case k >= 0:
					edge[k] += w
				case k == -1:
					none[n] += w
				}
			}
			return
		}
		i := cells[c]
		choice[c] = -1
		walk(c+1, w*a.none[i])
		if a.rest[i] > 0 {
			choice[c] = -2
			walk(c+1, w*a.rest[i])
		}
		for k := a.start[i]; k < a.start[i+1]; k++ {
			if r := a.rank[k]; !used[r] {
				used[r] = true
				choice[c] = k
				walk(c+1, w*a.weight[k])
				used[r] = false
			}
		}
	}
	walk(0, 1)
	for n, i := range cells {
		m.none[i] = none[n] / total
		for k := a.start[i]; k < a.start[i+1]; k++ {
			m.edge[k] = edge[k] / total
		}
	}
}

// components are the connected components of the graph of cells and
// candidates on the edges that keep accepts, each as its cells in
// ascending order, the components in the order of their first cell.
func (a *association) components(keep func(k int) bool) [][]int {
	parent := make([]int, a.cells+a.cands)
	for i := range parent {
		parent[i] = i
	}
	find := func(x int) int {
		for parent[x] != x {
			parent[x] = parent[parent[x]]
			x = parent[x]
		}
		return x
	}
	for i := range a.cells {
		for k := a.start[i]; k < a.start[i+1]; k++ {
			if keep(k) {
				x, y := find(i), find(a.cells+a.rank[k])
				if x != y {
					// The lower root wins, so a component's root is its
					// first cell.
					parent[max(x, y)] = min(x, y)
				}
			}
		}
	}
	index := make(map[int]int)
	var out [][]int
	for i := range a.cells {
		r := find(i)
		c, ok := index[r]
		if !ok {
			c = len(out)
			index[r] = c
			out = append(out, nil)
		}
		out[c] = append(out[c], i)
	}
	return out
}

// marginalise computes the marginal probability of each option of each cell
// given that no candidate is the counterpart of two cells, by belief
// propagation on the bipartite graph of cells and candidates (Williams &
// Lau 2014, IEEE Trans. Aerospace and Electronic Systems 50(4):2942–2959).
//
// The model is the one of data association in target tracking: cell i's
// counterpart, if present, is candidate j with likelihood ratio ψ_ij (its
// Gaussian density over the density of candidates that are nobody's
// counterpart, times the prior of a counterpart) and absent with weight
// ψ_i0; a candidate is the counterpart of at most one cell. The exact
// marginals sum over every joint assignment, which is out of reach beyond a
// handful of cells; the messages
//
//	μ_i→j = ψ_ij / (ψ_i0 + Σ_{j'≠j} ψ_ij' ν_j'→i)
//	ν_j→i = 1 / (1 + Σ_{i'≠i} μ_i'→j)
//
// converge (Williams & Lau prove it) to marginals that are exact on graphs
// without cycles and close to exact on the sparse graphs met here. Each
// sweep costs one pass over the edges.
func (a *association) marginalise() marginals {
	ne := len(a.rank)
	nu := make([]float64, ne) // ν_j→i, on the edge (i, j)
	mu := make([]float64, ne) // μ_i→j
	for k := range nu {
		nu[k] = 1
	}
	// Transpose: the edges of each candidate.
	cstart := make([]int, a.cands+1)
	for _, r := range a.rank {
		cstart[r+1]++
	}
	for j := range a.cands {
		cstart[j+1] += cstart[j]
	}
	byCand := make([]int, ne)
	fill := append([]int(nil), cstart[:a.cands]...)
	for k, r := range a.rank {
		byCand[fill[r]] = k
		fill[r]++
	}

	m := marginals{edge: make([]float64, ne), none: make([]float64, a.cells)}
	for m.iterations = 1; m.iterations <= bpMaxIterations; m.iterations++ {
		for i := range a.cells {
			total := a.none[i] + a.rest[i]
			for k := a.start[i]; k < a.start[i+1]; k++ {
				total += a.weight[k] * nu[k]
			}
			for k := a.start[i]; k < a.start[i+1]; k++ {
				// total − ψ_ij ν_ji ≥ ψ_i0 > 0.
				mu[k] = a.weight[k] / math.Max(total-a.weight[k]*nu[k], a.none[i])
			}
		}
		change := 0.0
		for j := range a.cands {
			sum := 0.0
			for _, k := range byCand[cstart[j]:cstart[j+1]] {
				sum += mu[k]
			}
			for _, k := range byCand[cstart[j]:cstart[j+1]] {
				next := 1 / (1 + math.Max(sum-mu[k], 0))
				change = math.Max(change, math.Abs(next-nu[k]))
				nu[k] = next
			}
		}
		if change < bpTolerance {
			m.converged = true
			break
		}
	}
	m.iterations = min(m.iterations, bpMaxIterations)
	for i := range a.cells {
		total := a.none[i] + a.rest[i]
		for k := a.start[i]; k < a.start[i+1]; k++ {
			total += a.weight[k] * nu[k]
		}
		m.none[i] = a.none[i] / total
		for k := a.start[i]; k < a.start[i+1]; k++ {
			m.edge[k] = a.weight[k] * nu[k] / total
		}
	}
	return m
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
