package register

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sync"

	"gonum.org/v1/gonum/mat"

	"ferry/internal/parallel"
	"ferry/landmarks"
	"ferry/register/internal/hull"
	"ferry/transform"
)

// fieldMethodName names the uncertainty model of field.go in the transform
// file.
const fieldMethodName = "gaussian displacement field, restricted maximum likelihood"

// fieldMapper gives the variance of a fitted transform's error at any
// point under the error model: the transform's cardinal weights on the
// landmarks, combined by FieldParams.variance.
type fieldMapper struct {
	dim    int
	params *FieldParams
	src    []transform.Vec
	d      []float64  // each landmark's kind noise D
	corr   *mat.Dense // the landmarks' correlations, N×N
	newD   float64    // D of a mapped point (a cell)
	weigh  func(xs []transform.Vec) (*mat.Dense, error)
	rows   [][]float64 // corr's rows, for FieldParams.variance
	// hull is the landmarks' hull, outside which the variances take the
	// error model's Outside factor.
	hull *hull.Hull

	gridOnce sync.Once
	g        *fieldGrid
}

// newFieldMapper prepares the variances of t, fitted to the landmarks of u.
func newFieldMapper(t transform.Transform, u *UncertaintyModel) (*fieldMapper, error) {
	if u.Field == nil {
		return nil, errors.New("no error model")
	}
	n := len(u.Source)
	f := &fieldMapper{dim: t.Dim(), params: u.Field, src: u.Source, d: make([]float64, n), newD: u.CellNoise,
		hull: hull.New(u.Source, t.Dim())}
	if len(u.Kinds) != n {
		return nil, fmt.Errorf("uncertainty model: %d landmarks with %d kinds", n, len(u.Kinds))
	}
	for i, k := range u.Kinds {
		f.d[i] = u.Field.kindNoise(k)
	}
	f.corr = mat.NewDense(n, n, nil)
	f.rows = make([][]float64, n)
	for i := range n {
		for j := range n {
			f.corr.Set(i, j, u.Field.corr(u.Source[i].Sub(u.Source[j]).Norm()))
		}
		f.rows[i] = f.corr.RawRowView(i)
	}
	switch t := t.(type) {
	case *transform.Spline:
		c, err := t.Cardinal()
		if err != nil {
			return nil, err
		}
		f.weigh = func(xs []transform.Vec) (*mat.Dense, error) { return c.Weights(xs), nil }
	case *transform.Linear:
		if t.Kind() != transform.Affine {
			return nil, fmt.Errorf("the error model needs a model that reproduces affine maps, not %s", t.Kind())
		}
		w, err := affineHat(u.Source, u.Weights, f.dim)
		if err != nil {
			return nil, err
		}
		f.weigh = w
	default:
		return nil, fmt.Errorf("the error model needs an affine map or a spline, not %s", t.Kind())
	}
	return f, nil
}

// affineHat returns the cardinal weights of a weighted least-squares affine
// fit: a(x) = W·P·(PᵀWP)⁻¹·p(x), P the rows [1, x_j].
func affineHat(src []transform.Vec, w []float64, dim int) (func([]transform.Vec) (*mat.Dense, error), error) {
	n, m := len(src), dim+1
	c := centroidOf(src)
	row := func(x transform.Vec) []float64 {
		r := make([]float64, m)
		r[0] = 1
		for l := range dim {
			r[1+l] = x[l] - c[l]
		}
		return r
	}
	wp := mat.NewDense(n, m, nil)
	ptwp := mat.NewSymDense(m, nil)
	for j, x := range src {
		r := row(x)
		for a := range m {
			wp.Set(j, a, w[j]*r[a])
			for b := a; b < m; b++ {
				ptwp.SetSym(a, b, ptwp.At(a, b)+w[j]*r[a]*r[b])
			}
		}
	}
	var chol mat.Cholesky
	if !chol.Factorize(ptwp) {
		return nil, errors.New("the landmarks do not span the volume")
	}
	return func(xs []transform.Vec) (*mat.Dense, error) {
		px := mat.NewDense(m, len(xs), nil)
		for i, x := range xs {
			for a, v := range row(x) {
				px.Set(a, i, v)
			}
		}
		var sol mat.Dense
		if err := chol.SolveTo(&sol, px); err != nil {
			return nil, err
		}
		out := mat.NewDense(n, len(xs), nil)
		out.Mul(wp, &sol)
		return out, nil
	}, nil
}

// fieldGridNodes is the most grid nodes interpolated variances use; a job
// of fewer points than that has every point's variance computed exactly
// (about 0.3 ms a point at 300 landmarks on one core, O(N²) a point).
const fieldGridNodes = 16 * 16 * 16

// variances returns each point's variance per axis (µm²) of the
// transform's error, picking noise of the point itself not included:
// exactly, or, when onGrid, trilinearly interpolated from exact values on
// the mapper's grid (variancesOnGrid) for the points inside it.
func (f *fieldMapper) variances(xs []transform.Vec, onGrid bool) []transform.Vec {
	var out []transform.Vec
	if !onGrid {
		out = f.exactVariances(xs)
	} else {
		out = f.variancesOnGrid(xs)
	}
	if f.params.Outside != (transform.Vec{}) {
		for i, x := range xs {
			if !f.hull.Contains(x) {
				for k := range f.dim {
					out[i][k] *= f.params.outsideScale(k)
				}
			}
		}
	}
	return out
}

// fieldGrid is the grid of variancesOnGrid: the landmarks' bounding box
// widened by a tenth of its size on every side, cut into about
// 2·fieldGridNodes nodes, with the exact variances at its nodes. It depends
// on the model only, so that a cell's radius does not depend on which other
// cells are mapped with it, nor on the blocks they are mapped in.
//
// A node's variance is computed when a point in one of the grid cells it
// bounds first asks for it: the cells of a job seldom fill the whole box
// (its margin lies mostly outside the landmarks' hull, and an imaged block
// seldom reaches every corner), and each node costs O(N²). A node's value
// does not depend on which nodes are computed with it (exactVariances
// treats every point alone, in a fixed order of operations), so the radii
// are the same bits as with every node computed at once.
type fieldGrid struct {
	lo, hi transform.Vec
	cells  [3]int
	nodes  []transform.Vec
	// mu guards v and known: mappers are safe for concurrent use.
	mu    sync.Mutex
	v     []transform.Vec
	known []bool
}

// grid returns the mapper's grid, laid out on first use.
func (f *fieldMapper) grid() *fieldGrid {
	f.gridOnce.Do(func() { f.g = f.newGrid() })
	return f.g
}

func (f *fieldMapper) newGrid() *fieldGrid {
	g := &fieldGrid{lo: f.src[0], hi: f.src[0]}
	for _, x := range f.src {
		for k := range f.dim {
			g.lo[k], g.hi[k] = math.Min(g.lo[k], x[k]), math.Max(g.hi[k], x[k])
		}
	}
	volume, axes := 1.0, 0
	for k := range f.dim {
		margin := (g.hi[k] - g.lo[k]) / 10
		g.lo[k], g.hi[k] = g.lo[k]-margin, g.hi[k]+margin
		if g.hi[k] > g.lo[k] {
			volume *= g.hi[k] - g.lo[k]
			axes++
		}
	}
	step := math.Pow(volume/(2*fieldGridNodes), 1/float64(max(axes, 1)))
	for k := range 3 {
		g.cells[k] = 1
		if k < f.dim && g.hi[k] > g.lo[k] {
			g.cells[k] = max(1, int(math.Ceil((g.hi[k]-g.lo[k])/step)))
		}
	}
	nodes := make([]transform.Vec, 0, (g.cells[0]+1)*(g.cells[1]+1)*(g.cells[2]+1))
	at := func(k, i int) float64 {
		if g.cells[k] == 1 && !(g.hi[k] > g.lo[k]) {
			return g.lo[k]
		}
		return g.lo[k] + (g.hi[k]-g.lo[k])*float64(i)/float64(g.cells[k])
	}
	nz := g.cells[2] + 1
	if f.dim == 2 {
		nz = 1
	}
	for c := range nz {
		for b := range g.cells[1] + 1 {
			for a := range g.cells[0] + 1 {
				nodes = append(nodes, transform.Vec{at(0, a), at(1, b), at(2, c)})
			}
		}
	}
	if f.dim == 2 {
		for i := range nodes {
			nodes[i][2] = 0
		}
	}
	g.nodes = nodes
	g.v = make([]transform.Vec, len(nodes))
	g.known = make([]bool, len(nodes))
	return g
}

// inside reports whether x lies in the grid's box.
func (g *fieldGrid) inside(x transform.Vec, dim int) bool {
	for k := range dim {
		if x[k] < g.lo[k] || x[k] > g.hi[k] {
			return false
		}
	}
	return true
}

// variancesOnGrid interpolates the variances trilinearly from the mapper's
// grid (about 25 µm between nodes for a 500 µm block) for the points in its
// box, and computes those outside it exactly. The variance is smooth except
// for its dips at the landmarks, which linear interpolation fills in: near a
// landmark the radius errs wide.
func (f *fieldMapper) variancesOnGrid(xs []transform.Vec) []transform.Vec {
	g := f.grid()
	out := make([]transform.Vec, len(xs))
	var outside []int
	var far []transform.Vec
	var need []int
	g.mu.Lock()
	defer g.mu.Unlock()
	for i, x := range xs {
		if !g.inside(x, f.dim) {
			outside, far = append(outside, i), append(far, x)
			continue
		}
		c := g.corners(x, f.dim)
		for q, node := range c.node {
			if c.w[q] != 0 && !g.known[node] {
				g.known[node] = true
				need = append(need, node)
			}
		}
	}
	if len(need) > 0 {
		// Ascending, so that the work is the same whatever the order of
		// the points.
		slices.Sort(need)
		pts := make([]transform.Vec, len(need))
		for q, node := range need {
			pts[q] = g.nodes[node]
		}
		for q, v := range f.exactVariances(pts) {
			g.v[need[q]] = v
		}
	}
	// The corners are found again rather than kept (128 bytes a point):
	// a few divisions against a block's worth of garbage.
	for i, x := range xs {
		if !g.inside(x, f.dim) {
			continue
		}
		c := g.corners(x, f.dim)
		for q, node := range c.node {
			if w := c.w[q]; w != 0 {
				out[i] = out[i].Add(g.v[node].Scale(w))
			}
		}
	}
	for j, v := range f.exactVariances(far) {
		out[outside[j]] = v
	}
	return out
}

// gridCorners are the nodes of the grid cell around a point and their
// trilinear weights, in the order the interpolation sums them.
type gridCorners struct {
	node [8]int
	w    [8]float64
}

// corners finds the grid cell of x, a point inside the grid's box, and
// the weights of its corners.
func (g *fieldGrid) corners(x transform.Vec, dim int) gridCorners {
	idx := func(a, b, c int) int { return (c*(g.cells[1]+1)+b)*(g.cells[0]+1) + a }
	var cell [3]int
	var t [3]float64
	for k := range 3 {
		if k >= dim || !(g.hi[k] > g.lo[k]) {
			continue
		}
		u := (x[k] - g.lo[k]) / (g.hi[k] - g.lo[k]) * float64(g.cells[k])
		cell[k] = min(max(int(u), 0), g.cells[k]-1)
		t[k] = u - float64(cell[k])
	}
	dz := 2
	if dim == 2 {
		dz = 1
	}
	var out gridCorners
	q := 0
	for c := range dz {
		wc := 1 - t[2]
		if c == 1 {
			wc = t[2]
		}
		for b := range 2 {
			wb := 1 - t[1]
			if b == 1 {
				wb = t[1]
			}
			for a := range 2 {
				wa := 1 - t[0]
				if a == 1 {
					wa = t[0]
				}
				out.node[q], out.w[q] = idx(cell[0]+a, cell[1]+b, cell[2]+c), wa*wb*wc
				q++
			}
		}
	}
	return out
}

// exactVariances is variances computed point by point.
func (f *fieldMapper) exactVariances(xs []transform.Vec) []transform.Vec {
	out := make([]transform.Vec, len(xs))
	const block = 256
	parallel.Ranges((len(xs)+block-1)/block, 1, func(lo, hi int) {
		for b := lo; b < hi; b++ {
			s, e := b*block, min((b+1)*block, len(xs))
			a, err := f.weigh(xs[s:e])
			if err != nil {
				for i := s; i < e; i++ {
					out[i] = transform.Vec{math.NaN(), math.NaN(), math.NaN()}
				}
				continue
			}
			var ra mat.Dense
			ra.Mul(f.corr, a)
			// Row by row, each point's sums over the landmarks in the
			// landmarks' order: the rows of a and ra are read where they
			// lie, where a point's column strides across them.
			n, pts := len(f.src), e-s
			sums := make([]float64, 3*pts)
			rho, aRa, ada := sums[:pts], sums[pts:2*pts], sums[2*pts:]
			for j := range n {
				aj, raj := a.RawRowView(j), ra.RawRowView(j)
				src, dj := f.src[j], f.d[j]
				for c := range pts {
					w := aj[c]
					rho[c] += w * f.params.corr(xs[s+c].Sub(src).Norm())
					aRa[c] += w * raj[c]
					ada[c] += w * w * dj
				}
			}
			for c := range pts {
				for k := range f.dim {
					out[s+c][k] = f.params.Amplitude[k] * math.Max(1-2*rho[c]+aRa[c]+f.params.Noise[k]*ada[c], 0)
				}
			}
		}
	})
	return out
}

// noise is the picking noise of a mapped point (µm² per axis): that of a
// landmark of the cells' kind.
func (f *fieldMapper) noise() transform.Vec {
	var v transform.Vec
	for k := range f.dim {
		v[k] = f.params.Amplitude[k] * f.params.Noise[k] * f.newD
	}
	return v
}

// cellNoiseOf is the relative noise D of a mapped point. Cells are somata,
// whose centroids are picked no better than the landmarks on average: a
// soma landmark's D when the set has enough somata to estimate it and it
// is the larger, else the landmarks' mean.
func cellNoiseOf(kinds []landmarks.Kind, f *FieldParams) float64 {
	somata, sum := 0, 0.0
	for _, k := range kinds {
		sum += f.kindNoise(k)
		if k == landmarks.KindSoma {
			somata++
		}
	}
	mean := sum / float64(max(len(kinds), 1))
	if d, ok := f.Kinds[landmarks.KindSoma]; ok && somata >= fieldMinPerKind {
		return math.Max(d, mean)
	}
	return mean
}

// WithoutField returns a copy of r whose uncertainty model has the error
// model of field.go taken out, leaving the fitted model's own kriging
// variance calibrated by the per-axis scale: the model suggest conditions
// on when it adds landmarks (its cross-covariances after a new landmark are
// those of the spline or the affine fit). r itself is left as it was.
func WithoutField(r *Registration) (*Registration, error) {
	if err := r.checkUncertainty(); err != nil {
		return nil, err
	}
	if r.Uncertainty.Field == nil {
		return r, nil
	}
	u := r.Uncertainty.WithoutField()
	g := *r
	g.Uncertainty = &u
	return &g, nil
}
