package transform

import "math"

// ApplyWithJacobian returns t(p) and t's Jacobian at p, in one pass over the
// spline's nodes when t is a spline (mapping with uncertainty needs both at
// every point, and the pass is most of the cost).
func ApplyWithJacobian(t Transform, p Vec) (Vec, Mat) {
	if s, ok := t.(*Spline); ok {
		return s.applyJacobian(p)
	}
	return t.Apply(p), t.Jacobian(p)
}

// applyJacobian is Apply and Jacobian sharing each node's distance: the
// one place the 3-D spline's derivative is computed.
func (s *Spline) applyJacobian(p Vec) (Vec, Mat) {
	if s.Dimension == 2 {
		return s.Apply(p), s.Jacobian(p)
	}
	c := s.mustReady()
	q := s.Matrix.MulVec(p).Add(s.Offset)
	x := (p[0] - s.Centre[0]) * c.invScale
	y := (p[1] - s.Centre[1]) * c.invScale
	z := (p[2] - s.Centre[2]) * c.invScale
	ux, uy, uz, wx, wy, wz := c.ux, c.uy, c.uz, c.wx, c.wy, c.wz
	n := len(ux)
	uy, uz, wx, wy, wz = uy[:n], uz[:n], wx[:n], wy[:n], wz[:n]
	var fx, fy, fz float64
	var g00, g01, g02, g10, g11, g12, g20, g21, g22 float64
	// Nodes go in chunks: the square roots and divisions of a chunk are
	// independent of each other and pipeline, where one long loop that
	// also accumulates waits on each in turn.
	const chunk = 64
	var rs, invs [chunk]float64
	for c0 := 0; c0 < n; c0 += chunk {
		c1 := min(c0+chunk, n)
		for j := c0; j < c1; j++ {
			dx, dy, dz := x-ux[j], y-uy[j], z-uz[j]
			r := math.Sqrt(dx*dx + dy*dy + dz*dz)
			rs[j-c0] = r
			invs[j-c0] = 0
			if r > 0 {
				invs[j-c0] = -1 / r
			}
		}
		for j := c0; j < c1; j++ {
			r, inv := rs[j-c0], invs[j-c0]
			fx += wx[j] * r
			fy += wy[j] * r
			fz += wz[j] * r
			gx, gy, gz := (x-ux[j])*inv, (y-uy[j])*inv, (z-uz[j])*inv
			g00 += wx[j] * gx
			g01 += wx[j] * gy
			g02 += wx[j] * gz
			g10 += wy[j] * gx
			g11 += wy[j] * gy
			g12 += wy[j] * gz
			g20 += wz[j] * gx
			g21 += wz[j] * gy
			g22 += wz[j] * gz
		}
	}
	g := Mat{{g00, g01, g02}, {g10, g11, g12}, {g20, g21, g22}}
	q[0] -= fx
	q[1] -= fy
	q[2] -= fz
	jac := s.Matrix
	for a := range 3 {
		for b := range 3 {
			jac[a][b] += g[a][b] * c.invScale
		}
	}
	return q, jac
}
