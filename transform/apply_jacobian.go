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
	q := s.Matrix.MulVec(p).Add(s.Offset)
	x := (p[0] - s.Centre[0]) * s.invScale
	y := (p[1] - s.Centre[1]) * s.invScale
	z := (p[2] - s.Centre[2]) * s.invScale
	ux, uy, uz, wx, wy, wz := s.ux, s.uy, s.uz, s.wx, s.wy, s.wz
	n := len(ux)
	uy, uz, wx, wy, wz = uy[:n], uz[:n], wx[:n], wy[:n], wz[:n]
	var fx, fy, fz float64
	var g Mat
	for j := range ux {
		dx, dy, dz := x-ux[j], y-uy[j], z-uz[j]
		r := math.Sqrt(dx*dx + dy*dy + dz*dz)
		fx += wx[j] * r
		fy += wy[j] * r
		fz += wz[j] * r
		if r > 0 {
			inv := -1 / r
			gx, gy, gz := dx*inv, dy*inv, dz*inv
			g[0][0] += wx[j] * gx
			g[0][1] += wx[j] * gy
			g[0][2] += wx[j] * gz
			g[1][0] += wy[j] * gx
			g[1][1] += wy[j] * gy
			g[1][2] += wy[j] * gz
			g[2][0] += wz[j] * gx
			g[2][1] += wz[j] * gy
			g[2][2] += wz[j] * gz
		}
	}
	q[0] -= fx
	q[1] -= fy
	q[2] -= fz
	jac := s.Matrix
	for a := range 3 {
		for b := range 3 {
			jac[a][b] += g[a][b] * s.invScale
		}
	}
	return q, jac
}
