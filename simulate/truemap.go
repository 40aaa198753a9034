package simulate

import (
	"fmt"
	"math"
	"math/rand/v2"

	"ferry/transform"
)

// WarpBump is one broad Gaussian displacement of the true map's warp: a
// source point p moves by DisplacementUM·exp(−|p − CentreUM|²/(2·WidthUM²))
// in target space.
type WarpBump struct {
	CentreUM       transform.Vec `json:"centre_um"`
	DisplacementUM transform.Vec `json:"displacement_um"`
	WidthUM        float64       `json:"width_um"`
}

// TrueMapModel is the true source→target map in closed form:
//
//	u = p − CentreUM
//	a = (sx·u_x, sy·u_y, Z(p_z) − Z(CentreUM_z)),  Z(z) = ct·z + (cb − ct)·z²/(2·D)
//	q = OffsetUM + Rotation·Mirror·a + Σ bumps
//
// where sx, sy are the lateral shrinkage, the local depth compression
// Z'(z) = ct + (cb − ct)·z/D runs from ct at the pia to cb at the field's
// bottom D, and Mirror negates a_x when set.
type TrueMapModel struct {
	CentreUM      transform.Vec `json:"centre_um"`
	LateralShrink [2]float64    `json:"lateral_shrink"`
	ZTop          float64       `json:"z_compression_top"`
	ZBottom       float64       `json:"z_compression_bottom"`
	DepthUM       float64       `json:"depth_um"`
	Mirror        bool          `json:"mirror"`
	Rotation      transform.Mat `json:"rotation"`
	OffsetUM      transform.Vec `json:"offset_um"`
	Bumps         []WarpBump    `json:"warp_bumps"`
}

// newTrueMap draws the warp from rng and builds the rest from p.
func newTrueMap(p Params, rng *rand.Rand) TrueMapModel {
	m := TrueMapModel{
		CentreUM:      p.FieldUM.Scale(0.5),
		LateralShrink: p.LateralShrink,
		ZTop:          p.ZCompressionTop,
		ZBottom:       p.ZCompressionBottom,
		DepthUM:       p.FieldUM[2],
		Mirror:        p.Mirror,
		Rotation:      rotationXYZ(p.RotationDeg),
		OffsetUM:      p.OffsetUM,
	}
	for range p.WarpBumps {
		centre := transform.Vec{rng.Float64() * p.FieldUM[0], rng.Float64() * p.FieldUM[1], rng.Float64() * p.FieldUM[2]}
		length := p.WarpAmplitudeUM[0] + rng.Float64()*(p.WarpAmplitudeUM[1]-p.WarpAmplitudeUM[0])
		m.Bumps = append(m.Bumps, WarpBump{
			CentreUM:       centre,
			DisplacementUM: unitVector(rng).Scale(length),
			WidthUM:        p.WarpWidthUM,
		})
	}
	return m
}

// rotationXYZ is Rz·Ry·Rx: the rotation about x first, then y, then z.
func rotationXYZ(deg transform.Vec) transform.Mat {
	rad := deg.Scale(math.Pi / 180)
	sx, cx := math.Sincos(rad[0])
	sy, cy := math.Sincos(rad[1])
	sz, cz := math.Sincos(rad[2])
	rx := transform.Mat{{1, 0, 0}, {0, cx, -sx}, {0, sx, cx}}
	ry := transform.Mat{{cy, 0, sy}, {0, 1, 0}, {-sy, 0, cy}}
	rz := transform.Mat{{cz, -sz, 0}, {sz, cz, 0}, {0, 0, 1}}
	return rz.Mul(ry.Mul(rx))
}

// depth is Z(z), the integral of the local depth compression from the pia.
func (m *TrueMapModel) depth(z float64) float64 {
	return m.ZTop*z + (m.ZBottom-m.ZTop)*z*z/(2*m.DepthUM)
}

// compression is Z'(z).
func (m *TrueMapModel) compression(z float64) float64 {
	return m.ZTop + (m.ZBottom-m.ZTop)*z/m.DepthUM
}

// linearPart is diag(±sx, sy, ·) applied to p − centre, before rotation.
func (m *TrueMapModel) linearPart(p transform.Vec) transform.Vec {
	u := p.Sub(m.CentreUM)
	a := transform.Vec{m.LateralShrink[0] * u[0], m.LateralShrink[1] * u[1], m.depth(p[2]) - m.depth(m.CentreUM[2])}
	if m.Mirror {
		a[0] = -a[0]
	}
	return a
}

// Apply maps a source position (µm) to its true target position (µm).
func (m *TrueMapModel) Apply(p transform.Vec) transform.Vec {
	q := m.OffsetUM.Add(m.Rotation.MulVec(m.linearPart(p)))
	for _, b := range m.Bumps {
		d := p.Sub(b.CentreUM)
		g := math.Exp(-d.Dot(d) / (2 * b.WidthUM * b.WidthUM))
		q = q.Add(b.DisplacementUM.Scale(g))
	}
	return q
}

// Jacobian is ∂Apply_i/∂p_j at p.
func (m *TrueMapModel) Jacobian(p transform.Vec) transform.Mat {
	sx := m.LateralShrink[0]
	if m.Mirror {
		sx = -sx
	}
	diag := transform.Mat{{sx, 0, 0}, {0, m.LateralShrink[1], 0}, {0, 0, m.compression(p[2])}}
	j := m.Rotation.Mul(diag)
	for _, b := range m.Bumps {
		d := p.Sub(b.CentreUM)
		s2 := b.WidthUM * b.WidthUM
		g := math.Exp(-d.Dot(d) / (2 * s2))
		for r := range 3 {
			for c := range 3 {
				j[r][c] -= b.DisplacementUM[r] * g * d[c] / s2
			}
		}
	}
	return j
}

// Invert finds the source position that maps to q by Newton's iteration,
// started from the inverse of the map without its warp.
func (m *TrueMapModel) Invert(q transform.Vec) (transform.Vec, error) {
	if !q.IsFinite() {
		return transform.Vec{}, fmt.Errorf("target %v µm is not finite", q)
	}
	// Start: undo offset and rotation, then the diagonal, with the depth
	// compression taken at the field's centre.
	a := m.Rotation.T().MulVec(q.Sub(m.OffsetUM))
	if m.Mirror {
		a[0] = -a[0]
	}
	p := transform.Vec{
		m.CentreUM[0] + a[0]/m.LateralShrink[0],
		m.CentreUM[1] + a[1]/m.LateralShrink[1],
		m.CentreUM[2] + a[2]/m.compression(m.CentreUM[2]),
	}
	for range 50 {
		r := q.Sub(m.Apply(p))
		if r.Norm() < 1e-9 {
			return p, nil
		}
		inv, ok := m.Jacobian(p).Inverse()
		if !ok {
			break
		}
		p = p.Add(inv.MulVec(r))
	}
	if r := q.Sub(m.Apply(p)); r.Norm() < 1e-6 {
		return p, nil
	}
	return transform.Vec{}, fmt.Errorf("inverting the true map at %v µm: %w", q, transform.ErrNoConvergence)
}

// unitVector is a direction drawn uniformly on the sphere.
func unitVector(rng *rand.Rand) transform.Vec {
	for {
		v := transform.Vec{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
		if n := v.Norm(); n > 1e-9 {
			return v.Scale(1 / n)
		}
	}
}

// gauss3 is a vector of independent normal deviates with the given sd per
// axis.
func gauss3(rng *rand.Rand, sd transform.Vec) transform.Vec {
	return transform.Vec{rng.NormFloat64() * sd[0], rng.NormFloat64() * sd[1], rng.NormFloat64() * sd[2]}
}

// iso is the same sd on all three axes.
func iso(sd float64) transform.Vec { return transform.Vec{sd, sd, sd} }
