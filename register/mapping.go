package register

import (
	"context"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/spatial/kdtree"

	"ferry/transform"
)

// The statuses of a mapped point, from the most to the least serious; a
// point gets the first that applies.
const (
	StatusNoInverse    = "no_inverse"   // --inverse: no source point maps onto it
	StatusFolded       = "folded"       // the transform folds here: positions are not one-to-one
	StatusExtrapolated = "extrapolated" // outside the landmarks' hull
	StatusIsolated     = "isolated"     // inside the hull but far from every landmark
	StatusOK           = "ok"
)

// Mapped is one mapped point with its uncertainty.
type Mapped struct {
	// Pos is the mapped position (µm); meaningless when Status is
	// StatusNoInverse.
	Pos transform.Vec
	// Cov is the covariance of Pos (µm²), SD the square roots of its
	// diagonal, R95 the radius of the sphere (circle in 2-D) around Pos that
	// holds the true position with 95 % probability.
	Cov    transform.Mat
	SD     transform.Vec
	R95    float64
	Status string
}

// Mapper maps points through a fitted transform with their uncertainty. It is
// safe for concurrent use.
type Mapper struct {
	t    transform.Transform
	pred transform.Predictor
	u    *UncertaintyModel
	dim  int
	hull supportHull
	tree *kdtree.Tree
	// near classifies the hull's boxes for the isolated status: +1 near
	// a landmark throughout, −1 far throughout, 0 to be asked point by
	// point.
	near     []int8
	radii    *RadiusTable
	handSign float64
	// heldOut are the held-out predictions of the cells a refined
	// transform was fitted to, by exact source position (see HeldOut).
	heldOut map[transform.Vec]HeldOut
	// field, when the transform file carries the error model, gives the
	// variances in place of pred.
	field *fieldMapper
}

// NewMapper prepares the mapping of points through the transform of a
// transform file, with the file's uncertainty model.
func NewMapper(f *transform.File) (*Mapper, error) {
	if err := plausible(f.Transform); err != nil {
		return nil, err
	}
	dim := f.Transform.Dim()
	u, err := ParseUncertaintyModel(f.Uncertainty, dim)
	if err != nil {
		return nil, err
	}
	var pred transform.Predictor
	var field *fieldMapper
	if u.Field != nil {
		if field, err = newFieldMapper(f.Transform, u); err != nil {
			return nil, fmt.Errorf("uncertainty model: %v", err)
		}
	} else if pred, err = transform.NewPredictor(f.Transform, u.Source, u.Weights); err != nil {
		return nil, fmt.Errorf("uncertainty model: %v", err)
	}
	m := &Mapper{
		t: f.Transform, pred: pred, u: u, dim: dim, field: field,
		hull:  newSupportHull(u.Source, dim),
		tree:  newPointTree(u.Source),
		radii: Radius95(dim),
	}
	if m.heldOut, err = parseHeldOut(f.Refinement, dim); err != nil {
		return nil, err
	}
	m.classifyNear()
	// The handedness of the transform as a whole: a fold is where the local
	// Jacobian disagrees with it.
	m.handSign = 1
	if f.Transform.Jacobian(centroidOf(u.Source)).Det() < 0 {
		m.handSign = -1
	}
	return m, nil
}

// Map maps one source point x (µm). cellSD, when not nil, is the point's
// own localisation error (µm per axis, one standard deviation), in the space
// it is given in.
func (m *Mapper) Map(x transform.Vec, cellSD *transform.Vec) Mapped {
	return m.finishForward(x, m.factor(x), cellSD)
}

// factor is the predictor's factor at x, or with the error model the
// diagonal of the transform's error variance there (µm²).
func (m *Mapper) factor(x transform.Vec) transform.Mat {
	if m.field != nil {
		return diagonal(m.field.variances([]transform.Vec{x}, false)[0], m.dim)
	}
	return m.pred.Factor(x)
}

func (m *Mapper) finishForward(x transform.Vec, factor transform.Mat, cellSD *transform.Vec) Mapped {
	y, jac := transform.ApplyWithJacobian(m.t, x)
	if h, ok := m.heldOut[x]; ok {
		// A cell the refined transform was fitted to: its position and
		// uncertainty without its own correspondence.
		y = h.Predicted
		factor = transform.Mat{}
		for k := range m.dim {
			factor[k][k] = h.Factor[k]
		}
	}
	cov := m.covariance(factor, jac, cellSD)
	return m.finish(Mapped{Pos: y, Cov: cov}, x, jac)
}

// MapInverse maps one target point q (µm) back to the source. Its covariance
// is that of the forward map at the source point found, with cellSD (target
// space) in place of the landmarks' picking noise, carried back through the
// inverse Jacobian.
func (m *Mapper) MapInverse(q transform.Vec, cellSD *transform.Vec) Mapped {
	x, err := m.t.Invert(q)
	if err != nil {
		return Mapped{Status: StatusNoInverse}
	}
	return m.finishInverse(x, m.factor(x), cellSD)
}

func (m *Mapper) finishInverse(x transform.Vec, factor transform.Mat, cellSD *transform.Vec) Mapped {
	jac := m.t.Jacobian(x)
	inv, ok := jac.Inverse()
	if !ok {
		return Mapped{Pos: x, Status: StatusFolded}
	}
	cov := m.covariance(factor, jac, nil)
	if cellSD != nil {
		noise := m.u.landmarkNoise(jac, m.dim)
		if m.field != nil {
			noise = diagonal(m.field.noise(), m.dim)
		}
		cov = subtractPickNoise(cov, noise, m.dim)
		for k := range m.dim {
			cov[k][k] += cellSD[k] * cellSD[k]
		}
	}
	cov = inv.Mul(cov).Mul(inv.T())
	return m.finish(Mapped{Pos: x, Cov: cov}, x, jac)
}

// finish fills SD, R95 and the status of a point whose source position is x.
func (m *Mapper) finish(p Mapped, x transform.Vec, jac transform.Mat) Mapped {
	for k := range m.dim {
		p.SD[k] = math.Sqrt(math.Max(p.Cov[k][k], 0))
	}
	p.R95 = m.radii.Radius(p.Cov)
	switch {
	case jac.Det()*m.handSign <= 0:
		p.Status = StatusFolded
	case !m.hull.contains(x):
		p.Status = StatusExtrapolated
	case m.isolated(x):
		p.Status = StatusIsolated
	default:
		p.Status = StatusOK
	}
	return p
}

// covariance is P(x) from the predictor's factor at x, or with cellSD the
// same with the landmarks' picking noise replaced by the cell's own,
// carried through the Jacobian.
func (m *Mapper) covariance(f transform.Mat, jac transform.Mat, cellSD *transform.Vec) transform.Mat {
	if m.field != nil {
		// f is the transform's error variance; the cell's own error is
		// the picking noise of a landmark of its kind, or the one given.
		if cellSD == nil {
			noise := m.field.noise()
			for k := range m.dim {
				f[k][k] += noise[k]
			}
			return f
		}
		var d transform.Mat
		for k := range m.dim {
			d[k][k] = cellSD[k] * cellSD[k]
		}
		own := jac.Mul(d).Mul(jac.T())
		for i := range m.dim {
			for j := range m.dim {
				f[i][j] += own[i][j]
			}
		}
		return f
	}
	if cellSD == nil {
		return m.u.Covariance(f, nil, m.dim)
	}
	terms := m.u.CellTerms(jac, *cellSD, m.dim)
	return m.u.Covariance(f, &terms, m.dim)
}

// CellTerms are the parts of a cell's covariance that do not depend on the
// transform's prediction factor: the landmarks' picking noise that the
// cell's own localisation error replaces, and that error carried into the
// target. They let a caller that varies the factor (suggest, adding
// landmarks) pay for them once a cell.
type CellTerms struct {
	// Pick is the landmarks' picking noise at the cell (its diagonal is
	// taken off), Own the cell's error J·diag(sd²)·Jᵀ (added).
	Pick, Own transform.Mat
}

// CellTerms returns the terms of a cell with localisation error cellSD (µm
// per axis) at a point of Jacobian jac.
func (u *UncertaintyModel) CellTerms(jac transform.Mat, cellSD transform.Vec, dim int) CellTerms {
	var d transform.Mat
	for k := range dim {
		d[k][k] = cellSD[k] * cellSD[k]
	}
	return CellTerms{Pick: u.landmarkNoise(jac, dim), Own: jac.Mul(d).Mul(jac.T())}
}

// Covariance is a mapped point's covariance (µm²) from the prediction
// factor f there:
//
//	P = diag(√s)·(F + ν·I)·diag(√s),
//
// and, with the terms of a cell's own localisation error, P with the
// landmarks' picking noise taken off its diagonal (never below zero) and
// the cell's own error added.
func (u *UncertaintyModel) Covariance(f transform.Mat, terms *CellTerms, dim int) transform.Mat {
	var c transform.Mat
	for i := range dim {
		for j := range dim {
			c[i][j] = math.Sqrt(u.Scale[i]*u.Scale[j]) * f[i][j]
		}
		c[i][i] += u.Scale[i] * u.NoiseFactor
	}
	if terms == nil {
		return c
	}
	c = subtractPickNoise(c, terms.Pick, dim)
	for i := range dim {
		for j := range dim {
			c[i][j] += terms.Own[i][j]
		}
	}
	return c
}

// landmarkNoise is the landmarks' own picking noise in the target at a point
// of Jacobian jac: from the sd flags when they were given, else the noise
// part s·ν of the model's scale. For the spline s·ν is its nugget, the noise
// its smoothing implies. A linear model's scale holds noise and misfit
// together and cannot part them, and is taken as all noise: auto chooses a
// linear model only where the spline does no better, that is where misfit is
// small against noise, and counting the landmarks' noise again on top of the
// cell's own would make radii wider than they need be (about 99.5 % coverage
// instead of 95 %). A linear model forced with --model onto a warped block
// keeps its misfit out of the cells' radii; its leave-one-out errors show it.
func (u *UncertaintyModel) landmarkNoise(jac transform.Mat, dim int) transform.Mat {
	if u.SourceSD != nil || u.TargetSD != nil {
		return pickNoise(Settings{SourceSD: u.SourceSD, TargetSD: u.TargetSD}, jac)
	}
	var c transform.Mat
	for k := range dim {
		c[k][k] = u.Scale[k] * u.NoiseFactor
	}
	return c
}

// subtractPickNoise takes noise off the diagonal of c, never below the
// part of c that is not noise at all.
func subtractPickNoise(c, noise transform.Mat, dim int) transform.Mat {
	for k := range dim {
		c[k][k] = math.Max(c[k][k]-noise[k][k], 0)
	}
	return c
}

// isolated reports that x lies farther than isolatedSpacings typical
// spacings from every landmark. Only points inside the hull ask, so the
// hull's classification boxes answer most of them: a box whose centre is
// within the reach less its half-diagonal is near throughout, one beyond the
// reach plus it is far throughout, and only the boxes between ask the tree.
func (m *Mapper) isolated(x transform.Vec) bool {
	reach := isolatedSpacings * m.u.Spacing
	if b := m.hull.box(x); b >= 0 {
		switch m.near[b] {
		case 1:
			return false
		case -1:
			return true
		}
	}
	return m.nearestLandmark(x) > reach
}

// classifyNear fills m.near over the hull's boxes.
func (m *Mapper) classifyNear() {
	h := &m.hull
	reach := isolatedSpacings * m.u.Spacing
	half := 0.5 * math.Sqrt(h.step[0]*h.step[0]+h.step[1]*h.step[1]+h.step[2]*h.step[2])
	m.near = make([]int8, len(h.class))
	for k := range h.n[2] {
		for j := range h.n[1] {
			for i := range h.n[0] {
				c := transform.Vec{
					h.lo[0] + (float64(i)+0.5)*h.step[0],
					h.lo[1] + (float64(j)+0.5)*h.step[1],
					h.lo[2] + (float64(k)+0.5)*h.step[2],
				}
				if m.dim == 2 {
					c[2] = 0
				}
				d := m.nearestLandmark(c)
				b := (k*h.n[1]+j)*h.n[0] + i
				switch {
				case d+half < reach:
					m.near[b] = 1
				case d-half > reach:
					m.near[b] = -1
				}
			}
		}
	}
}

func (m *Mapper) nearestLandmark(x transform.Vec) float64 {
	_, d := m.tree.Nearest(kdtree.Point{x[0], x[1], x[2]})
	return math.Sqrt(d)
}

// MapAll maps every point of xs on all cores, forward or (inverse) back.
// The predictor's factors are computed for all points together, which for a
// large spline is several times faster than point by point.
func (m *Mapper) MapAll(xs []transform.Vec, cellSD *transform.Vec, inverse bool) []Mapped {
	return m.mapAll(xs, cellSD, inverse, len(xs) > fieldGridNodes)
}

// mapAll is MapAll with the choice of the error model's interpolated
// variances (onGrid) made by the caller, for the whole job.
func (m *Mapper) mapAll(xs []transform.Vec, cellSD *transform.Vec, inverse, onGrid bool) []Mapped {
	out := make([]Mapped, len(xs))
	src := make([]transform.Vec, len(xs))
	ok := make([]bool, len(xs))
	each(len(xs), func(i int) {
		if inverse {
			x, err := m.t.Invert(xs[i])
			src[i], ok[i] = x, err == nil
		} else {
			src[i], ok[i] = xs[i], true
		}
	})
	factors := make([]transform.Mat, len(xs))
	if m.field != nil {
		for i, v := range m.field.variances(src, onGrid) {
			factors[i] = diagonal(v, m.dim)
		}
	} else if bp, isBatch := m.pred.(transform.BatchPredictor); isBatch {
		bp.FactorAll(src, factors)
	} else {
		each(len(xs), func(i int) { factors[i] = m.pred.Factor(src[i]) })
	}
	each(len(xs), func(i int) {
		switch {
		case !ok[i]:
			out[i] = Mapped{Status: StatusNoInverse}
		case inverse:
			out[i] = m.finishInverse(src[i], factors[i], cellSD)
		default:
			out[i] = m.finishForward(src[i], factors[i], cellSD)
		}
	})
	return out
}

// mapBlock is how many points MapAllContext maps between two looks at its
// context: a few hundred milliseconds of work for a large spline.
const mapBlock = 1 << 14

// MapAllContext is MapAll that stops with ctx's error between blocks of
// mapBlock points, so that an interrupt ends a map of millions of cells
// within a fraction of a second. The blocks are of a fixed size, so that the
// result does not depend on the number of cores.
func (m *Mapper) MapAllContext(ctx context.Context, xs []transform.Vec, cellSD *transform.Vec, inverse bool) ([]Mapped, error) {
	out := make([]Mapped, 0, len(xs))
	for lo := 0; lo < len(xs); lo += mapBlock {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		out = append(out, m.mapAll(xs[lo:min(lo+mapBlock, len(xs))], cellSD, inverse, len(xs) > fieldGridNodes)...)
	}
	return out, nil
}

// each runs f for every index in [0, n) on all cores.
func each(n int, f func(i int)) {
	transform.ParallelRanges(n, 256, func(lo, hi int) {
		for i := lo; i < hi; i++ {
			f(i)
		}
	})
}

func centroidOf(points []transform.Vec) transform.Vec {
	var c transform.Vec
	for _, p := range points {
		c = c.Add(p)
	}
	return c.Scale(1 / float64(max(len(points), 1)))
}

// supportHull is the landmarks' convex hull approximated from outside by
// its support planes in a fixed set of directions: a point is inside when no
// direction sees it beyond the farthest landmark. With 642 directions and
// the six axes in 3-D (160 in 2-D) the approximation exceeds the true hull by a thin margin
// near its edges only.
//
// Testing every direction for every point would cost more than the rest of
// mapping, so the landmarks' bounding box is cut into a grid of boxes
// classified once: a box whose corners are all inside lies inside (the
// polytope is convex), a box whose corners are all beyond one plane lies
// outside, and only points in the boxes between are tested plane by plane.
type supportHull struct {
	dim   int
	dirs  []transform.Vec
	reach []float64
	tol   float64
	// The classification grid: box (i, j, k) spans lo + (i, j, k)·step to
	// one step more; class is +1 inside, −1 outside, 0 mixed.
	lo, step transform.Vec
	n        [3]int
	class    []int8
}

// hullGrid is the number of classification boxes along each axis.
const hullGrid = 16

func newSupportHull(points []transform.Vec, dim int) supportHull {
	h := supportHull{dim: dim}
	if dim == 2 {
		const n = 160
		for k := range n {
			a := 2 * math.Pi * float64(k) / n
			h.dirs = append(h.dirs, transform.Vec{math.Cos(a), math.Sin(a), 0})
		}
	} else {
		// A Fibonacci lattice spreads directions evenly over the sphere.
		const n = 642
		golden := math.Pi * (3 - math.Sqrt(5))
		for k := range n {
			z := 1 - (2*float64(k)+1)/n
			r := math.Sqrt(1 - z*z)
			a := golden * float64(k)
			h.dirs = append(h.dirs, transform.Vec{r * math.Cos(a), r * math.Sin(a), z})
		}
		// The axes too, so that the polytope lies inside the bounding
		// box that the classification grid covers, and the landmarks'
		// principal axes, so that the faces of a box-like cloud (a block
		// cut along its own axes) are met squarely rather than by planes a
		// few degrees off, which would push the middle of a face outwards.
		for k := range 3 {
			var d transform.Vec
			d[k] = 1
			h.dirs = append(h.dirs, d, d.Scale(-1))
		}
		for _, d := range principalAxes(points) {
			h.dirs = append(h.dirs, d, d.Scale(-1))
		}
	}
	h.reach = make([]float64, len(h.dirs))
	extent := 0.0
	for k, d := range h.dirs {
		h.reach[k] = math.Inf(-1)
		lo := math.Inf(1)
		for _, p := range points {
			v := d.Dot(p)
			h.reach[k] = math.Max(h.reach[k], v)
			lo = math.Min(lo, v)
		}
		extent = math.Max(extent, h.reach[k]-lo)
	}
	h.tol = 1e-9 * extent
	h.classify(points)
	return h
}

// classify fills the grid of boxes over the points' bounding box.
func (h *supportHull) classify(points []transform.Vec) {
	hi := points[0]
	h.lo = points[0]
	for _, p := range points {
		for k := range h.dim {
			h.lo[k] = math.Min(h.lo[k], p[k])
			hi[k] = math.Max(hi[k], p[k])
		}
	}
	h.n = [3]int{1, 1, 1}
	for k := range h.dim {
		h.n[k] = hullGrid
		h.step[k] = (hi[k] - h.lo[k]) / hullGrid
		if !(h.step[k] > 0) {
			// Flat along this axis: one box, and every point tested.
			h.n[k], h.step[k] = 1, 0
		}
	}
	// Which planes each grid corner lies beyond.
	nc := [3]int{h.n[0] + 1, h.n[1] + 1, h.n[2] + 1}
	if h.dim == 2 {
		nc[2] = 1
	}
	corner := func(i, j, k int) transform.Vec {
		return transform.Vec{h.lo[0] + float64(i)*h.step[0], h.lo[1] + float64(j)*h.step[1], h.lo[2] + float64(k)*h.step[2]}
	}
	words := (len(h.dirs) + 63) / 64
	beyond := make([]uint64, nc[0]*nc[1]*nc[2]*words)
	inside := make([]bool, nc[0]*nc[1]*nc[2])
	// Corners are independent: classify the layers of them on all cores,
	// each against the planes in struct-of-arrays form.
	dx, dy, dz := make([]float64, len(h.dirs)), make([]float64, len(h.dirs)), make([]float64, len(h.dirs))
	for d, dir := range h.dirs {
		dx[d], dy[d], dz[d] = dir[0], dir[1], dir[2]
	}
	transform.ParallelRanges(nc[2]*nc[1], 1, func(lo, hi int) {
		for row := lo; row < hi; row++ {
			k, j := row/nc[1], row%nc[1]
			for i := range nc[0] {
				c := (k*nc[1]+j)*nc[0] + i
				x := corner(i, j, k)
				inside[c] = true
				for d := range dx {
					if dx[d]*x[0]+dy[d]*x[1]+dz[d]*x[2] > h.reach[d]+h.tol {
						beyond[c*words+d/64] |= 1 << (d % 64)
						inside[c] = false
					}
				}
			}
		}
	})
	h.class = make([]int8, h.n[0]*h.n[1]*h.n[2])
	for k := range h.n[2] {
		for j := range h.n[1] {
			for i := range h.n[0] {
				allIn := true
				common := make([]uint64, words)
				for w := range common {
					common[w] = ^uint64(0)
				}
				for dk := range 2 {
					if h.dim == 2 && dk == 1 {
						break
					}
					for dj := range 2 {
						for di := range 2 {
							c := ((k+dk)*nc[1]+j+dj)*nc[0] + i + di
							allIn = allIn && inside[c]
							for w := range common {
								common[w] &= beyond[c*words+w]
							}
						}
					}
				}
				out := false
				for _, w := range common {
					out = out || w != 0
				}
				b := (k*h.n[1]+j)*h.n[0] + i
				switch {
				case allIn && h.step[0] > 0 && h.step[1] > 0 && (h.dim == 2 || h.step[2] > 0):
					h.class[b] = 1
				case out:
					h.class[b] = -1
				}
			}
		}
	}
}

// principalAxes are the unit eigenvectors of the points' covariance (none
// when it cannot be factorised).
func principalAxes(points []transform.Vec) []transform.Vec {
	c := centroidOf(points)
	cov := mat.NewSymDense(3, nil)
	for _, p := range points {
		d := p.Sub(c)
		for i := range 3 {
			for j := i; j < 3; j++ {
				cov.SetSym(i, j, cov.At(i, j)+d[i]*d[j])
			}
		}
	}
	var es mat.EigenSym
	if !es.Factorize(cov, true) {
		return nil
	}
	var v mat.Dense
	es.VectorsTo(&v)
	axes := make([]transform.Vec, 3)
	for k := range 3 {
		axes[k] = transform.Vec{v.At(0, k), v.At(1, k), v.At(2, k)}
	}
	return axes
}

// box is the index of the classification box that holds x, or −1 when x
// lies outside the bounding box (beyond a rounding margin).
func (h *supportHull) box(x transform.Vec) int {
	var idx [3]int
	for k := range h.dim {
		if h.step[k] == 0 {
			continue
		}
		f := (x[k] - h.lo[k]) / h.step[k]
		if f < -1e-6 || f > float64(h.n[k])+1e-6 {
			return -1
		}
		idx[k] = min(max(int(f), 0), h.n[k]-1)
	}
	return (idx[2]*h.n[1]+idx[1])*h.n[0] + idx[0]
}

func (h supportHull) contains(x transform.Vec) bool {
	b := h.box(x)
	if b < 0 {
		// Outside the bounding box, hence outside the hull, up to the
		// tolerance the planes allow.
		return false
	}
	switch h.class[b] {
	case 1:
		return true
	case -1:
		return false
	}
	for k, d := range h.dirs {
		if d[0]*x[0]+d[1]*x[1]+d[2]*x[2] > h.reach[k]+h.tol {
			return false
		}
	}
	return true
}
