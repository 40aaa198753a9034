package register

import (
	"context"
	"fmt"
	"math"

	"gonum.org/v1/gonum/spatial/kdtree"

	"ferry/internal/parallel"
	"ferry/register/internal/hull"
	"ferry/status"
	"ferry/transform"
)

// Mapped is one mapped point with its uncertainty.
type Mapped struct {
	// Pos is the mapped position (µm); meaningless when Status is
	// status.NoInverse.
	Pos transform.Vec
	// Cov is the covariance of Pos (µm²), SD the square roots of its
	// diagonal, R95 the radius of the sphere (circle in 2-D) around Pos that
	// holds the true position with 95 % probability.
	Cov transform.Mat
	SD  transform.Vec
	R95 float64
	// Status is the most serious of the mapping statuses that applies.
	Status status.Status
}

// Mapper maps points through a fitted transform with their uncertainty. It is
// safe for concurrent use.
type Mapper struct {
	t    transform.Transform
	pred transform.Predictor
	u    *UncertaintyModel
	dim  int
	hull *hull.Hull
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
// registration, with its uncertainty model.
func NewMapper(r *Registration) (*Mapper, error) {
	if err := plausible(r.Transform); err != nil {
		return nil, err
	}
	if err := r.checkUncertainty(); err != nil {
		return nil, err
	}
	dim, u := r.Transform.Dim(), r.Uncertainty
	var err error
	var pred transform.Predictor
	var field *fieldMapper
	if u.Field != nil {
		if field, err = newFieldMapper(r.Transform, u); err != nil {
			return nil, fmt.Errorf("uncertainty model: %v", err)
		}
	} else if pred, err = transform.NewPredictor(r.Transform, u.Source, u.Weights); err != nil {
		return nil, fmt.Errorf("uncertainty model: %v", err)
	}
	m := &Mapper{
		t: r.Transform, pred: pred, u: u, dim: dim, field: field,
		hull:  hull.New(u.Source, dim),
		tree:  newPointTree(u.Source),
		radii: Radius95(dim),
	}
	if m.heldOut, err = parseHeldOut(r.Refinement, dim); err != nil {
		return nil, err
	}
	m.classifyNear()
	// The handedness of the transform as a whole: a fold is where the local
	// Jacobian disagrees with it.
	m.handSign = 1
	if r.Transform.Jacobian(centroidOf(u.Source)).Det() < 0 {
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
		return Mapped{Status: status.NoInverse}
	}
	return m.finishInverse(x, m.factor(x), cellSD)
}

func (m *Mapper) finishInverse(x transform.Vec, factor transform.Mat, cellSD *transform.Vec) Mapped {
	jac := m.t.Jacobian(x)
	inv, ok := jac.Inverse()
	if !ok {
		return Mapped{Pos: x, Status: status.Folded}
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
		p.Status = status.Folded
	case !m.hull.Contains(x):
		p.Status = status.Extrapolated
	case m.isolated(x):
		p.Status = status.Isolated
	default:
		p.Status = status.OK
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
	if b := m.hull.Box(x); b >= 0 {
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
	h := m.hull
	reach := isolatedSpacings * m.u.Spacing
	half := h.HalfDiagonal()
	m.near = make([]int8, h.Boxes())
	for b := range m.near {
		d := m.nearestLandmark(h.BoxCentre(b))
		switch {
		case d+half < reach:
			m.near[b] = 1
		case d-half > reach:
			m.near[b] = -1
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
	m.mapInto(out, xs, cellSD, inverse, onGrid)
	return out
}

// mapInto is mapAll writing into out (len(xs) long), so that a job mapped
// block by block fills one slice instead of copying each block's.
func (m *Mapper) mapInto(out []Mapped, xs []transform.Vec, cellSD *transform.Vec, inverse, onGrid bool) {
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
			out[i] = Mapped{Status: status.NoInverse}
		case inverse:
			out[i] = m.finishInverse(src[i], factors[i], cellSD)
		default:
			out[i] = m.finishForward(src[i], factors[i], cellSD)
		}
	})
}

// mapBlock is how many points MapAllContext maps between two looks at its
// context: a few hundred milliseconds of work for a large spline.
const mapBlock = 1 << 14

// MapAllContext is MapAll that stops with ctx's error between blocks of
// mapBlock points, so that an interrupt ends a map of millions of cells
// within a fraction of a second. The blocks are of a fixed size, so that the
// result does not depend on the number of cores.
func (m *Mapper) MapAllContext(ctx context.Context, xs []transform.Vec, cellSD *transform.Vec, inverse bool) ([]Mapped, error) {
	out := make([]Mapped, len(xs))
	for lo := 0; lo < len(xs); lo += mapBlock {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		hi := min(lo+mapBlock, len(xs))
		m.mapInto(out[lo:hi], xs[lo:hi], cellSD, inverse, len(xs) > fieldGridNodes)
	}
	return out, nil
}

// each runs f for every index in [0, n) on all cores.
func each(n int, f func(i int)) {
	parallel.Ranges(n, 256, func(lo, hi int) {
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
