package suggest

import (
	"math"

	"ferry/register"
	"ferry/transform"
)

// cellModel turns the prediction factor at a cell into the cell's
// covariance exactly as register.Mapper does for `ferry map` (the tests
// hold the two equal): P = diag(√s)(F + ν·I)diag(√s) and, with a cell
// localisation error, the landmarks' picking noise taken off the diagonal
// (never below zero) and the cell's own error carried through the
// Jacobian, J·diag(sd²)·Jᵀ, put in. Only F changes as landmarks are added,
// so the rest is computed once per cell.
type cellModel struct {
	dim   int
	scale transform.Vec
	nu    float64
	own   bool
	// pick[i] is the diagonal of the landmarks' picking noise at cell i
	// and extra[i] the cell's own error in the target (own only).
	pick  []transform.Vec
	extra []transform.Mat
	radii *register.RadiusTable
}

func newCellModel(t transform.Transform, u *register.UncertaintyModel, cells []transform.Vec, cellSD *transform.Vec) *cellModel {
	m := &cellModel{
		dim: t.Dim(), scale: u.Scale, nu: u.NoiseFactor, own: cellSD != nil,
		radii: register.NewRadiusTable(t.Dim(), 0.95),
	}
	if !m.own {
		return m
	}
	m.pick = make([]transform.Vec, len(cells))
	m.extra = make([]transform.Mat, len(cells))
	for i, x := range cells {
		jac := t.Jacobian(x)
		m.pick[i] = m.landmarkNoise(u, jac)
		var d transform.Mat
		for k := range m.dim {
			d[k][k] = cellSD[k] * cellSD[k]
		}
		m.extra[i] = jac.Mul(d).Mul(jac.T())
	}
	return m
}

// landmarkNoise is the diagonal of the landmarks' own picking noise in the
// target at a point of Jacobian jac: from the stated picking errors,
// J·diag(source sd²)·Jᵀ + diag(target sd²), when there are any; otherwise
// the noise part s·ν of the model's scale.
func (m *cellModel) landmarkNoise(u *register.UncertaintyModel, jac transform.Mat) transform.Vec {
	var n transform.Vec
	if u.SourceSD != nil || u.TargetSD != nil {
		var c transform.Mat
		if u.SourceSD != nil {
			var d transform.Mat
			for k := range 3 {
				d[k][k] = u.SourceSD[k] * u.SourceSD[k]
			}
			c = jac.Mul(d).Mul(jac.T())
		}
		for k := range 3 {
			n[k] = c[k][k]
			if u.TargetSD != nil {
				n[k] += u.TargetSD[k] * u.TargetSD[k]
			}
		}
		return n
	}
	for k := range m.dim {
		n[k] = m.scale[k] * m.nu
	}
	return n
}

// subset is the model of the cells listed, in that order.
func (m *cellModel) subset(idx []int) *cellModel {
	if !m.own {
		return m
	}
	s := *m
	s.pick = make([]transform.Vec, len(idx))
	s.extra = make([]transform.Mat, len(idx))
	for k, i := range idx {
		s.pick[k], s.extra[k] = m.pick[i], m.extra[i]
	}
	return &s
}

// covariance is the covariance (µm²) of cell i's mapped position when the
// prediction factor there is f.
func (m *cellModel) covariance(i int, f transform.Mat) transform.Mat {
	var c transform.Mat
	for a := range m.dim {
		for b := range m.dim {
			c[a][b] = math.Sqrt(m.scale[a]*m.scale[b]) * f[a][b]
		}
		c[a][a] += m.scale[a] * m.nu
	}
	if !m.own {
		return c
	}
	for k := range m.dim {
		c[k][k] = math.Max(c[k][k]-m.pick[i][k], 0)
	}
	for a := range m.dim {
		for b := range m.dim {
			c[a][b] += m.extra[i][a][b]
		}
	}
	return c
}

// radius is cell i's r95 (µm) when the factor there is f.
func (m *cellModel) radius(i int, f transform.Mat) float64 {
	return m.radii.Radius(m.covariance(i, f))
}
