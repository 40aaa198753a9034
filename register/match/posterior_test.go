package match

import (
	"math"
	"math/rand/v2"
	"testing"
)

// exactMarginals sums over every joint assignment of a small association:
// each cell takes its no-match option, its rest (a private option like
// no-match) or one of its candidates, no candidate twice.
func exactMarginals(a *association) (edge, none []float64) {
	edge = make([]float64, len(a.rank))
	none = make([]float64, a.cells)
	used := make([]bool, a.cands)
	choice := make([]int, a.cells) // edge index, −1 none, −2 rest
	total := 0.0
	var walk func(i int, w float64)
	walk = func(i int, w float64) {
		if i == a.cells {
			total += w
			for c, k := range choice {
				switch {
				case k >= 0:
					edge[k] += w
				case k == -1:
					none[c] += w
				}
			}
			return
		}
		choice[i] = -1
		walk(i+1, w*a.none[i])
		if a.rest[i] > 0 {
			choice[i] = -2
			walk(i+1, w*a.rest[i])
		}
		for k := a.start[i]; k < a.start[i+1]; k++ {
			if r := a.rank[k]; !used[r] {
				used[r] = true
				choice[i] = k
				walk(i+1, w*a.weight[k])
				used[r] = false
			}
		}
	}
	walk(0, 1)
	for k := range edge {
		edge[k] /= total
	}
	for i := range none {
		none[i] /= total
	}
	return edge, none
}

// newAssociation builds an association from each cell's (candidate,
// weight) pairs, candidates ascending.
func newAssociation(cands int, none []float64, edges [][][2]float64) *association {
	a := &association{cells: len(none), cands: cands, start: make([]int, len(none)+1), none: none, rest: make([]float64, len(none))}
	for i, es := range edges {
		for _, e := range es {
			a.rank = append(a.rank, int(e[0]))
			a.weight = append(a.weight, e[1])
		}
		a.start[i+1] = len(a.rank)
	}
	return a
}

// TestMarginalsExactOnTrees: belief propagation for data association
// (Williams & Lau 2014, IEEE Trans. Aerospace and Electronic Systems
// 50(4):2942–2959) is exact where the graph of cells and candidates has no
// cycle.
func TestMarginalsExactOnTrees(t *testing.T) {
	for _, tc := range []struct {
		name  string
		cands int
		none  []float64
		edges [][][2]float64
	}{
		{"one cell, one candidate", 1, []float64{0.1}, [][][2]float64{{{0, 30}}}},
		{"one cell, two candidates", 2, []float64{0.1}, [][][2]float64{{{0, 30}, {1, 3}}}},
		{"two cells, one candidate", 1, []float64{0.1, 0.1}, [][][2]float64{{{0, 30}}, {{0, 20}}}},
		{"chain", 2, []float64{0.1, 0.05, 0.2}, [][][2]float64{{{0, 10}}, {{0, 40}, {1, 5}}, {{1, 8}}}},
		{"star", 3, []float64{0.1, 0.1, 0.1, 0.1}, [][][2]float64{{{0, 9}, {1, 9}, {2, 1}}, {{0, 50}}, {{1, 2}}, {{2, 100}}}},
		{"cell without options", 1, []float64{1, 0.1}, [][][2]float64{{}, {{0, 7}}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			a := newAssociation(tc.cands, tc.none, tc.edges)
			m := a.marginalise()
			if !m.converged {
				t.Fatalf("no convergence in %d sweeps", m.iterations)
			}
			edge, none := exactMarginals(a)
			for k := range edge {
				if math.Abs(m.edge[k]-edge[k]) > 1e-8 {
					t.Errorf("edge %d: %.10f, want %.10f", k, m.edge[k], edge[k])
				}
			}
			for i := range none {
				if math.Abs(m.none[i]-none[i]) > 1e-8 {
					t.Errorf("cell %d no match: %.10f, want %.10f", i, m.none[i], none[i])
				}
			}
		})
	}
}

// TestPosteriorsOnCycles checks, on small random graphs with cycles, that
// posteriors sums exactly where belief propagation alone is approximate, and
// that belief propagation converges with each cell's probabilities summing
// to one.
func TestPosteriorsOnCycles(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	worstBP := 0.0
	for trial := range 300 {
		cells, cands := 2+rng.IntN(4), 2+rng.IntN(4)
		none := make([]float64, cells)
		edges := make([][][2]float64, cells)
		for i := range cells {
			none[i] = 0.02 + 0.3*rng.Float64()
			for j := range cands {
				if rng.Float64() < 0.6 {
					// Likelihood ratios over three orders of magnitude.
					edges[i] = append(edges[i], [2]float64{float64(j), math.Pow(10, 3*rng.Float64()-1)})
				}
			}
		}
		a := newAssociation(cands, none, edges)
		bp := a.marginalise()
		if !bp.converged {
			t.Fatalf("trial %d: no convergence in %d sweeps", trial, bp.iterations)
		}
		m := a.posteriors()
		edge, exactNone := exactMarginals(a)
		for i := range cells {
			sum := bp.none[i]
			for k := a.start[i]; k < a.start[i+1]; k++ {
				sum += bp.edge[k]
				worstBP = math.Max(worstBP, math.Abs(bp.edge[k]-edge[k]))
				if math.Abs(m.edge[k]-edge[k]) > 1e-12 {
					t.Fatalf("trial %d edge %d: %v, want %v", trial, k, m.edge[k], edge[k])
				}
			}
			if math.Abs(m.none[i]-exactNone[i]) > 1e-12 {
				t.Fatalf("trial %d cell %d no match: %v, want %v", trial, i, m.none[i], exactNone[i])
			}
			if math.Abs(sum-1) > 1e-12 {
				t.Fatalf("trial %d cell %d: probabilities sum to %v", trial, i, sum)
			}
		}
	}
	t.Logf("largest error of a belief-propagation marginal on these dense graphs: %.4f", worstBP)
}

func TestComponents(t *testing.T) {
	// Cells 0 and 2 share candidate 1; cell 1 stands alone on candidate 0;
	// cell 3 has no options.
	a := newAssociation(3, []float64{1, 1, 1, 1}, [][][2]float64{{{1, 5}}, {{0, 5}}, {{1, 2}, {2, 1}}, {}})
	got := a.components(func(int) bool { return true })
	want := [][]int{{0, 2}, {1}, {3}}
	if len(got) != len(want) {
		t.Fatalf("components %v, want %v", got, want)
	}
	for c := range want {
		if len(got[c]) != len(want[c]) {
			t.Fatalf("components %v, want %v", got, want)
		}
		for n := range want[c] {
			if got[c][n] != want[c][n] {
				t.Fatalf("components %v, want %v", got, want)
			}
		}
	}
}
