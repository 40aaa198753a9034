package transform

import (
	"math"
	"sort"
	"sync"

	"ferry/internal/parallel"
)

// localNodes is the largest spline whose posterior variance is computed
// exactly, and the size of the neighbourhoods beyond it.
const localNodes = 64

// localPredictor is the posterior variance of a large spline computed from
// neighbourhoods: the kriging variance at x given only the localNodes nodes
// nearest to the centre of x's cell in a regular grid, with the spline's own
// smoothing and weights (kriging in a moving neighbourhood; Chilès &
// Delfiner 1999, "Geostatistics: Modeling Spatial Uncertainty", §3.6). A
// point then costs O(localNodes²) instead of O(N²).
//
// What is lost: the information the farther nodes carry about x. Kriging
// variance is the smallest error variance over all unbiased linear
// predictors from the data used, and a neighbourhood's predictors are among
// the whole set's, so the neighbourhood variance is never below the exact
// one: the approximation only ever widens a radius. The tests bound how much.
//
// The grid's cell is twice the median distance from a node to its nearest
// neighbour: a 64-node neighbourhood reaches about four such distances from
// its centre, so a cell's points all lie well inside it, and cells are few
// enough that building their systems costs less than using them (a cell of
// one spacing left the radii as they are and doubled the time). Cells are built when first needed and kept; the predictor is safe
// for concurrent use.
type localPredictor struct {
	s    *Spline
	cell float64
	lo   Vec
	mu   sync.Mutex
	// cells maps a grid cell to its neighbourhood predictor.
	cells map[[3]int]*splinePredictor
	// meanWeight is the mean pair weight of the whole fit, which the
	// neighbourhoods' smoothing must keep (see newCell).
	meanWeight float64
}

func newLocalPredictor(s *Spline) (*localPredictor, error) {
	p := &localPredictor{s: s, cells: map[[3]int]*splinePredictor{}, meanWeight: 1}
	p.lo = s.Nodes[0]
	for _, q := range s.Nodes {
		for k := range s.Dimension {
			p.lo[k] = math.Min(p.lo[k], q[k])
		}
	}
	p.cell = 2 * medianNearest(s.Nodes)
	if !(p.cell > 0) {
		p.cell = s.Scale / 4
	}
	if s.PairWeights != nil {
		p.meanWeight = 0
		for _, w := range s.PairWeights {
			p.meanWeight += w
		}
		p.meanWeight /= float64(len(s.PairWeights))
	}
	// Build one cell now, so that a spline whose neighbourhoods cannot be
	// solved fails here and not in the middle of a batch.
	if _, err := p.cellFor(p.key(s.Centre)); err != nil {
		return nil, err
	}
	return p, nil
}

func (p *localPredictor) key(x Vec) [3]int {
	var k [3]int
	for a := range p.s.Dimension {
		k[a] = int(math.Floor((x[a] - p.lo[a]) / p.cell))
	}
	return k
}

func (p *localPredictor) cellFor(k [3]int) (*splinePredictor, error) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if c, ok := p.cells[k]; ok {
		return c, nil
	}
	var centre Vec
	for a := range p.s.Dimension {
		centre[a] = p.lo[a] + (float64(k[a])+0.5)*p.cell
	}
	idx := nearestNodes(p.s.Nodes, centre, localNodes)
	nodes := make([]Vec, len(idx))
	var weights []float64
	sub := 0.0
	for i, j := range idx {
		nodes[i] = p.s.Nodes[j]
		if p.s.PairWeights != nil {
			weights = append(weights, p.s.PairWeights[j])
			sub += p.s.PairWeights[j]
		}
	}
	// The system weighs pair i's smoothing by the mean weight over its own
	// nodes; scale S so that each node keeps the penalty S·w̄/w_i of the
	// whole fit.
	local := p.s.clone()
	if weights != nil {
		local.Smoothing = p.s.Smoothing * p.meanWeight / (sub / float64(len(idx)))
	}
	c, err := newExactSplinePredictor(local, nodes, weights)
	if err != nil {
		return nil, err
	}
	p.cells[k] = c
	return c, nil
}

// Factor is the neighbourhood posterior variance at x, times I.
func (p *localPredictor) Factor(x Vec) Mat {
	c, err := p.cellFor(p.key(x))
	if err != nil {
		// A neighbourhood that cannot be solved (its nodes on a plane)
		// falls back to the exact variance, which always exists.
		return p.exact().Factor(x)
	}
	return c.Factor(x)
}

// exact builds the whole spline's predictor, for the rare cell whose
// neighbourhood is degenerate.
func (p *localPredictor) exact() Predictor {
	e, err := newExactSplinePredictor(p.s, p.s.Nodes, p.s.PairWeights)
	if err != nil {
		// The full system was solved when the spline was fitted.
		panic("transform: the full spline system cannot be rebuilt: " + err.Error())
	}
	return e
}

// FactorAll computes Factor for every point, grouping points by cell so each
// cell's neighbourhood solves its points as blocks.
func (p *localPredictor) FactorAll(xs []Vec, dst []Mat) {
	order := make([]int, len(xs))
	keys := make([][3]int, len(xs))
	for i, x := range xs {
		order[i] = i
		keys[i] = p.key(x)
	}
	sort.Slice(order, func(a, b int) bool {
		ka, kb := keys[order[a]], keys[order[b]]
		if ka[0] != kb[0] {
			return ka[0] < kb[0]
		}
		if ka[1] != kb[1] {
			return ka[1] < kb[1]
		}
		return ka[2] < kb[2]
	})
	var groups []cellGroup
	for lo := 0; lo < len(order); {
		hi := lo + 1
		for hi < len(order) && keys[order[hi]] == keys[order[lo]] {
			hi++
		}
		groups = append(groups, cellGroup{lo, hi})
		lo = hi
	}
	parallel.Blocks(len(groups), 1, func() *groupScratch { return new(groupScratch) }, func(s *groupScratch, lo, hi int) {
		for _, g := range groups[lo:hi] {
			p.solveGroup(xs, dst, order, keys, g, s)
		}
	})
}

// cellGroup is a run of points, in sorted order, that share a cell.
type cellGroup struct{ lo, hi int }

// groupScratch is one worker's memory for the points of a group.
type groupScratch struct {
	pts []Vec
	out []Mat
}

// solveGroup factors the points of one group and writes each point's
// factor to its own slot of dst.
func (p *localPredictor) solveGroup(xs []Vec, dst []Mat, order []int, keys [][3]int, g cellGroup, s *groupScratch) {
	pts, out := s.pts[:0], s.out[:0]
	for _, i := range order[g.lo:g.hi] {
		pts = append(pts, xs[i])
	}
	out = append(out, make([]Mat, len(pts))...)
	s.pts, s.out = pts, out
	c, err := p.cellFor(keys[order[g.lo]])
	if err != nil {
		e := p.exact()
		for k, x := range pts {
			out[k] = e.Factor(x)
		}
	} else {
		c.FactorAll(pts, out)
	}
	for k, i := range order[g.lo:g.hi] {
		dst[i] = out[k]
	}
}

// nearestNodes returns the indices of the k nodes nearest to x, nearest
// first, ties broken by index.
func nearestNodes(nodes []Vec, x Vec, k int) []int {
	idx := make([]int, len(nodes))
	d := make([]float64, len(nodes))
	for i, q := range nodes {
		idx[i] = i
		d[i] = q.Sub(x).Dot(q.Sub(x))
	}
	sort.Slice(idx, func(a, b int) bool {
		if d[idx[a]] != d[idx[b]] {
			return d[idx[a]] < d[idx[b]]
		}
		return idx[a] < idx[b]
	})
	return idx[:min(k, len(idx))]
}

// medianNearest is the median distance from a node to its nearest other
// node.
func medianNearest(nodes []Vec) float64 {
	d := make([]float64, len(nodes))
	for i, q := range nodes {
		best := math.Inf(1)
		for j, r := range nodes {
			if i != j {
				best = math.Min(best, q.Sub(r).Dot(q.Sub(r)))
			}
		}
		d[i] = math.Sqrt(best)
	}
	sort.Float64s(d)
	return d[len(d)/2]
}
