package transform

import "fmt"

// WithAxesFrom returns a copy of s whose listed target axes take their
// kernel weights and affine rows from o: a spline on the same nodes and
// normalisation, fitted with another smoothing. The result is a spline
// smoothed differently along each target axis, as when in vivo z is several
// times noisier than x and y; it maps as any spline does. Its Smoothing and
// PairWeights stay those of s, which its posterior variance uses for every
// axis.
func (s *Spline) WithAxesFrom(o *Spline, axes ...int) (*Spline, error) {
	if s.Dimension != o.Dimension || s.Centre != o.Centre || s.Scale != o.Scale || len(s.Nodes) != len(o.Nodes) {
		return nil, fmt.Errorf("splines on different nodes cannot share axes")
	}
	for i := range s.Nodes {
		if s.Nodes[i] != o.Nodes[i] {
			return nil, fmt.Errorf("splines on different nodes cannot share axes (node %d)", i)
		}
	}
	c := s.clone()
	c.Weights = append([]Vec(nil), s.Weights...)
	for _, k := range axes {
		if k < 0 || k >= s.Dimension {
			return nil, fmt.Errorf("axis %d of a %d-D spline", k, s.Dimension)
		}
		for i := range c.Weights {
			c.Weights[i][k] = o.Weights[i][k]
		}
		c.Matrix[k] = o.Matrix[k]
		c.Offset[k] = o.Offset[k]
	}
	if err := c.Validate(); err != nil {
		return nil, err
	}
	return c, nil
}
