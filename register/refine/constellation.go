package refine

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/spatial/kdtree"

	"ferry/register"
	"ferry/status"
	"ferry/transform"
)

// The constellation step. Where the current fit is off by more than its
// radius (a section sheared against the next, a region far from every
// landmark), a soma's counterpart lies outside the reach that makes its
// match clear, and so do its neighbours': no pair is found there, and the
// fit never learns the local warp. But the neighbours are off by nearly the
// same offset, since the warp is smooth over the few tens of micrometres
// between them: the offset that carries most of the neighbours onto a
// candidate each at once is the local correction. This is a local
// generalised Hough transform over translations (Ballard 1981, Pattern
// Recognition 13(2):111–122), the mode found by a few mean-shift steps
// (Comaniciu & Meer 2002, IEEE TPAMI 24(5):603–619); it proposes where to
// look, and nothing more: the pairs found there are judged by the matching
// at the corrected position and then by the refitted spline, like every
// other pair, and the cells are mapped and judged by the spline alone.
const (
	// constellationNeighbours is how many somata (the soma itself
	// included) vote on a soma's offset.
	constellationNeighbours = 12
	// constellationSupport is how many of them must agree on one offset
	// within their noise: a chance offset gathers about 0.04 of a vote per
	// neighbour at 9·10⁴ candidates per mm³, so five of twelve is far
	// beyond chance.
	constellationSupport = 5
	// constellationReach is how far, in 95 % radii of a soma's mapped
	// position, its candidates are taken as votes.
	constellationReach = 2.5
	// constellationGate is the squared Mahalanobis distance under the
	// soma's own mapped covariance beyond which an agreed offset is
	// applied (χ²₃ median): a smaller one is within the fit's own error,
	// and shifting by it would add the vote's noise for nothing.
	constellationGate = 2.37
)

// localShifts returns for every soma the offset, from its mapped position,
// on which its neighbours' candidates agree, and whether it is to be
// applied: agreed by at least constellationSupport neighbours, with no
// distinct offset agreed by half as many, and beyond the fit's own error.
func (r *refiner) localShifts(mapped []register.Mapped) ([]transform.Vec, []bool) {
	n := len(mapped)
	shift := make([]transform.Vec, n)
	apply := make([]bool, n)
	if n < constellationSupport || len(r.candPos) == 0 {
		return shift, apply
	}
	dim := r.dim
	// A correct pair's offset differs from a neighbour's correct offset by
	// both pairs' noise: twice a pair's noise variance per axis.
	noise := r.pairNoise()
	var tol transform.Vec
	for a := range dim {
		tol[a] = 2 * math.Max(noise[a], minNoiseUM2)
	}
	cutoff := chi2_95(dim)
	dist2 := func(u transform.Vec) float64 {
		s := 0.0
		for a := range dim {
			s += u[a] * u[a] / tol[a]
		}
		return s
	}
	point := func(x transform.Vec) kdtree.Point {
		p := make(kdtree.Point, dim)
		copy(p, x[:dim])
		return p
	}
	cands := make(kdtree.Points, len(r.candPos))
	for j, y := range r.candPos {
		cands[j] = point(y)
	}
	candTree := kdtree.New(cands, false)
	// Each soma's votes: its candidates' offsets from its mapped position.
	usable := func(m register.Mapped) bool {
		return m.Status != status.NoInverse && m.Status != status.Folded &&
			m.Pos.IsFinite() && m.R95 > 0 && !math.IsInf(m.R95, 0)
	}
	votes := make([][]transform.Vec, n)
	for k, m := range mapped {
		if !usable(m) {
			continue
		}
		reach := constellationReach * m.R95
		keep := kdtree.NewDistKeeper(reach * reach)
		candTree.NearestSet(keep, point(m.Pos))
		for _, c := range keep.Heap {
			if c.Comparable == nil {
				continue
			}
			var d transform.Vec
			copy(d[:dim], c.Comparable.(kdtree.Point))
			votes[k] = append(votes[k], d.Sub(m.Pos))
		}
		// The order of a heap is not the order of the candidates; sort
		// so that ties resolve the same way on every run.
		sort.Slice(votes[k], func(a, b int) bool {
			va, vb := votes[k][a], votes[k][b]
			for ax := range dim {
				if va[ax] != vb[ax] {
					return va[ax] < vb[ax]
				}
			}
			return false
		})
	}
	somata := make(kdtree.Points, n)
	for i, x := range r.in.Somata {
		somata[i] = point(x)
	}
	somaTree := kdtree.New(append(kdtree.Points(nil), somata...), false)
	// The tree reorders its points; a soma is found again by position.
	at := make(map[transform.Vec]int, n)
	for i := n - 1; i >= 0; i-- {
		at[r.in.Somata[i]] = i
	}
	// support counts the neighbours with a vote within the cutoff of v,
	// and sums their kernels; best is each one's vote nearest v.
	support := func(nb []int, v transform.Vec) (count int, score float64, mean transform.Vec) {
		for _, k := range nb {
			bestD := math.Inf(1)
			var bestV transform.Vec
			for _, d := range votes[k] {
				if q := dist2(d.Sub(v)); q < bestD {
					bestD, bestV = q, d
				}
			}
			if bestD <= cutoff {
				count++
				score += math.Exp(-bestD / 2)
				mean = mean.Add(bestV)
			}
		}
		if count > 0 {
			mean = mean.Scale(1 / float64(count))
		}
		return count, score, mean
	}
	decide := func(i int) (transform.Vec, bool) {
		if !usable(mapped[i]) {
			return transform.Vec{}, false
		}
		keep := kdtree.NewNKeeper(constellationNeighbours)
		somaTree.NearestSet(keep, somata[i])
		nb := make([]int, 0, constellationNeighbours)
		for _, c := range keep.Heap {
			if c.Comparable == nil {
				continue
			}
			var x transform.Vec
			copy(x[:dim], c.Comparable.(kdtree.Point))
			nb = append(nb, at[x])
		}
		sort.Ints(nb)
		// The best vote as a seed, then mean-shift steps to the mode.
		bestScore, bestCount := -1.0, 0
		var best transform.Vec
		for _, k := range nb {
			for _, v := range votes[k] {
				c, s, _ := support(nb, v)
				if s > bestScore {
					bestScore, bestCount, best = s, c, v
				}
			}
		}
		if bestCount < constellationSupport {
			return transform.Vec{}, false
		}
		for range 3 {
			c, s, m := support(nb, best)
			if c < constellationSupport {
				return transform.Vec{}, false
			}
			best, bestCount = m, c
			_ = s
		}
		// A distinct offset agreed by half as many is a second
		// constellation that fits as well: no correction.
		for _, k := range nb {
			for _, v := range votes[k] {
				if dist2(v.Sub(best)) <= 4*cutoff {
					continue
				}
				if c, _, _ := support(nb, v); 2*c >= bestCount {
					return transform.Vec{}, false
				}
			}
		}
		cov := mapped[i].Cov
		for a := dim; a < 3; a++ {
			cov[a][a] = 1
		}
		inv, ok := cov.Inverse()
		if !ok {
			return transform.Vec{}, false
		}
		return best, quadraticForm(inv, best, dim) > constellationGate
	}
	for i := range n {
		shift[i], apply[i] = decide(i)
	}
	return shift, apply
}

func quadraticForm(a transform.Mat, d transform.Vec, dim int) float64 {
	s := 0.0
	for i := range dim {
		for j := range dim {
			s += d[i] * a[i][j] * d[j]
		}
	}
	return s
}

// chi2_95 is the 95 % quantile of χ² with dim degrees of freedom.
func chi2_95(dim int) float64 {
	if dim == 2 {
		return 5.991
	}
	return 7.815
}
