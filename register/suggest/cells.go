package suggest

import (
	"ferry/register"
	"ferry/transform"
)

// cellModel turns the prediction factor at a cell into the cell's
// covariance with register's own formula (UncertaintyModel.Covariance, the
// one map uses). Only the factor changes as landmarks are added, so the
// cells' other terms are computed once.
type cellModel struct {
	dim int
	u   *register.UncertaintyModel
	// terms[i] are cell i's terms of its own localisation error, nil
	// without one.
	terms []register.CellTerms
	radii *register.RadiusTable
}

func newCellModel(t transform.Transform, u *register.UncertaintyModel, cells []transform.Vec, cellSD *transform.Vec) *cellModel {
	m := &cellModel{dim: t.Dim(), u: u, radii: register.Radius95(t.Dim())}
	if cellSD == nil {
		return m
	}
	m.terms = make([]register.CellTerms, len(cells))
	for i, x := range cells {
		m.terms[i] = u.CellTerms(t.Jacobian(x), *cellSD, m.dim)
	}
	return m
}

// subset is the model of the cells listed, in that order.
func (m *cellModel) subset(idx []int) *cellModel {
	if m.terms == nil {
		return m
	}
	s := *m
	s.terms = make([]register.CellTerms, len(idx))
	for k, i := range idx {
		s.terms[k] = m.terms[i]
	}
	return &s
}

// covariance is the covariance (µm²) of cell i's mapped position when the
// prediction factor there is f.
func (m *cellModel) covariance(i int, f transform.Mat) transform.Mat {
	if m.terms == nil {
		return m.u.Covariance(f, nil, m.dim)
	}
	return m.u.Covariance(f, &m.terms[i], m.dim)
}

// radius is cell i's r95 (µm) when the factor there is f.
func (m *cellModel) radius(i int, f transform.Mat) float64 {
	return m.radii.Radius(m.covariance(i, f))
}
