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
// message below bpTolerance, or bpMaxIterations sweeps.
const (
	bpTolerance     = 1e-10
	bpMaxIterations = 1000
)

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
