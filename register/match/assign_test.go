package match

import (
	"math"
	"math/rand/v2"
	"testing"
)

// bruteForce is the least total cost of a sparseProblem by trying every
// assignment, +Inf when there is none.
func bruteForce(p *sparseProblem) float64 {
	used := make([]bool, p.cols)
	var best = math.Inf(1)
	var walk func(r int, sum float64)
	walk = func(r int, sum float64) {
		if r == p.rows {
			best = math.Min(best, sum)
			return
		}
		for k := p.start[r]; k < p.start[r+1]; k++ {
			if j := p.col[k]; !used[j] {
				used[j] = true
				walk(r+1, sum+p.cost[k])
				used[j] = false
			}
		}
	}
	walk(0, 0)
	return best
}

// randomProblem draws a sparse problem with rows private columns, like
// match's: rows × (shared + rows) columns, each row reaching some of the
// shared ones.
func randomProblem(rng *rand.Rand, rows, shared int, density float64) *sparseProblem {
	p := &sparseProblem{rows: rows, cols: shared + rows, start: make([]int, rows+1)}
	for r := range rows {
		for j := range shared {
			if rng.Float64() < density {
				p.col = append(p.col, j)
				// Integer costs make exact ties common.
				p.cost = append(p.cost, float64(rng.IntN(6)))
			}
		}
		p.col = append(p.col, shared+r)
		p.cost = append(p.cost, float64(rng.IntN(8)))
		p.start[r+1] = len(p.col)
	}
	return p
}

func totalCost(p *sparseProblem, cols []int) (float64, bool) {
	seen := map[int]bool{}
	sum := 0.0
	for r, c := range cols {
		if seen[c] {
			return 0, false
		}
		seen[c] = true
		found := false
		for k := p.start[r]; k < p.start[r+1]; k++ {
			if p.col[k] == c {
				sum += p.cost[k]
				found = true
				break
			}
		}
		if !found {
			return 0, false
		}
	}
	return sum, true
}

// TestSolveAgainstBruteForce checks the shortest augmenting path solver
// (Jonker & Volgenant 1987, Computing 38:325–340; Crouse 2016, IEEE Trans.
// Aerospace and Electronic Systems 52(4):1679–1696) against exhaustive
// search on random sparse problems with ties.
func TestSolveAgainstBruteForce(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, tc := range []struct {
		rows, shared int
		density      float64
	}{
		{1, 1, 1}, {2, 1, 1}, {3, 2, 0.8}, {4, 6, 0.5}, {5, 3, 0.9}, {6, 8, 0.3}, {7, 5, 0.6},
	} {
		for trial := range 200 {
			p := randomProblem(rng, tc.rows, tc.shared, tc.density)
			cols, err := p.solve()
			if err != nil {
				t.Fatalf("%d×%d trial %d: %v", tc.rows, tc.shared, trial, err)
			}
			got, ok := totalCost(p, cols)
			if !ok {
				t.Fatalf("%d×%d trial %d: %v is not an assignment", tc.rows, tc.shared, trial, cols)
			}
			if want := bruteForce(p); math.Abs(got-want) > 1e-9 {
				t.Fatalf("%d×%d trial %d: cost %v, want %v", tc.rows, tc.shared, trial, got, want)
			}
		}
	}
}

func TestSolveTiesGoToLowerColumn(t *testing.T) {
	// One row, two columns of equal cost.
	p := &sparseProblem{rows: 1, cols: 2, start: []int{0, 2}, col: []int{0, 1}, cost: []float64{1, 1}}
	cols, err := p.solve()
	if err != nil || cols[0] != 0 {
		t.Errorf("got %v, %v; want column 0", cols, err)
	}
}

func TestSolveInfeasible(t *testing.T) {
	// Two rows, one column between them.
	p := &sparseProblem{rows: 2, cols: 1, start: []int{0, 1, 2}, col: []int{0, 0}, cost: []float64{1, 2}}
	if _, err := p.solve(); err == nil {
		t.Error("an infeasible problem was solved")
	}
}
