package transform

import (
	"math"
	"sync"
)

// FoldCheck returns the smallest Jacobian determinant of t on a regular grid
// of n points per axis spanning the box [lo, hi] corners included (n×n in
// 2-D, where z is ignored and taken as 0; n×n×n in 3-D), and the grid point
// where it occurs. A spline folds — maps two source points to one target and
// turns space inside out between them — where the determinant is ≤ 0, so
// minDet ≤ 0 flags a fold inside the box, up to the grid's resolution.
//
// A mirrored transform has a negative determinant everywhere; for one, a
// fold is where the determinant turns positive, which FoldCheck of the
// transform chained with a reflection finds. n < 2 checks only the centre
// of the box. Ties go to the first grid point in x-fastest order.
func FoldCheck(t Transform, lo, hi Vec, n int) (minDet float64, at Vec) {
	dim := t.Dim()
	if n < 2 {
		c := lo.Add(hi).Scale(0.5)
		if dim == 2 {
			c[2] = 0
		}
		return t.Jacobian(c).Det(), c
	}
	nz := n
	if dim == 2 {
		nz = 1
	}
	total := n * n * nz
	step := hi.Sub(lo).Scale(1 / float64(n-1))
	point := func(idx int) Vec {
		i, j, k := idx%n, (idx/n)%n, idx/(n*n)
		p := Vec{lo[0] + float64(i)*step[0], lo[1] + float64(j)*step[1], lo[2] + float64(k)*step[2]}
		if dim == 2 {
			p[2] = 0
		}
		return p
	}
	// A NaN determinant (a broken transform) ranks below every number.
	rank := func(d float64) float64 {
		if math.IsNaN(d) {
			return math.Inf(-1)
		}
		return d
	}
	best, bestIdx := math.Inf(1), 0
	var mu sync.Mutex
	parallelRows(total, func(a, b int) {
		m, mi := math.Inf(1), a
		for idx := a; idx < b; idx++ {
			if d := rank(t.Jacobian(point(idx)).Det()); d < m {
				m, mi = d, idx
			}
		}
		mu.Lock()
		if m < best || (m == best && mi < bestIdx) {
			best, bestIdx = m, mi
		}
		mu.Unlock()
	})
	at = point(bestIdx)
	return t.Jacobian(at).Det(), at
}
