package register

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/integrate/quad"
	"gonum.org/v1/gonum/stat/distuv"

	"ferry/transform"
)

// The radius of the sphere around a mapped point that holds the true
// position with probability p, for a Gaussian error of covariance Σ, is the
// p-quantile of Q = Σ λ_k z_k² (λ the eigenvalues of Σ, z standard normal),
// square-rooted. Q has no closed-form quantile unless the λ are equal, so
// the cumulative probability is integrated over directions: writing z = ρω
// with ρ² ~ χ²_d independent of the uniformly distributed direction ω,
//
//	P(Q ≤ x) = E_ω[ F_χ²_d( x / Σ λ_k ω_k² ) ],
//
// a smooth integrand on the circle or sphere, so a modest product rule is
// accurate to about 1e-9 for the anisotropies met in practice. The quantile
// depends on the eigenvalues only through their ratios, so it is tabulated
// once per RadiusTable over the ratios and interpolated.

// RadiusTable turns covariances into p-radii.
type RadiusTable struct {
	dim int
	p   float64
	// g[a][b] is R²/λ₁ at λ₂/λ₁ = a/n and λ₃/λ₂ = b/n (3-D), or at
	// λ₂/λ₁ = a/n (2-D, b = 0).
	g [radiusGrid + 1][radiusGrid + 1]float64
}

const radiusGrid = 32

// NewRadiusTable tabulates the p-radius for dim-dimensional Gaussians.
func NewRadiusTable(dim int, p float64) *RadiusTable {
	t := &RadiusTable{dim: dim, p: p}
	rule := newSphereRule(dim)
	for a := 0; a <= radiusGrid; a++ {
		r2 := float64(a) / radiusGrid
		for b := 0; b <= radiusGrid; b++ {
			if dim == 2 && b > 0 {
				t.g[a][b] = t.g[a][0]
				continue
			}
			r3 := float64(b) / radiusGrid
			lam := [3]float64{1, r2, r2 * r3}
			t.g[a][b] = rule.quantile(lam, p)
		}
	}
	return t
}

// Radius returns the radius in micrometres of the sphere that holds the
// error of covariance cov (µm²) with the table's probability. In 2-D only
// the upper-left 2×2 block of cov is read. It is NaN when cov holds a number
// that is not finite.
func (t *RadiusTable) Radius(cov transform.Mat) float64 {
	for i := range t.dim {
		for j := range t.dim {
			if math.IsNaN(cov[i][j]) || math.IsInf(cov[i][j], 0) {
				// Not a covariance: say so rather than look the table
				// up at a meaningless place.
				return math.NaN()
			}
		}
	}
	lam := eigenvalues(cov, t.dim)
	if !(lam[0] > 0) {
		return 0
	}
	x := lam[1] / lam[0] * radiusGrid
	y := 0.0
	if t.dim == 3 && lam[1] > 0 {
		y = lam[2] / lam[1] * radiusGrid
	}
	return math.Sqrt(lam[0] * bilinear(&t.g, x, y))
}

func bilinear(g *[radiusGrid + 1][radiusGrid + 1]float64, x, y float64) float64 {
	x = math.Min(math.Max(x, 0), radiusGrid)
	y = math.Min(math.Max(y, 0), radiusGrid)
	i, j := int(x), int(y)
	if i == radiusGrid {
		i--
	}
	if j == radiusGrid {
		j--
	}
	fx, fy := x-float64(i), y-float64(j)
	return (1-fx)*(1-fy)*g[i][j] + fx*(1-fy)*g[i+1][j] + (1-fx)*fy*g[i][j+1] + fx*fy*g[i+1][j+1]
}

// eigenvalues of the symmetric part of cov, largest first, clipped at zero,
// in closed form: the trigonometric solution of the characteristic cubic of
// a symmetric 3×3 matrix (Smith 1961, Commun. ACM 4(4):168), which is a
// hundred times faster than a general eigensolver and accurate to rounding
// for the well-scaled covariances met here.
func eigenvalues(cov transform.Mat, dim int) [3]float64 {
	a := func(i, j int) float64 { return 0.5 * (cov[i][j] + cov[j][i]) }
	var v [3]float64
	if dim == 2 {
		m := 0.5 * (a(0, 0) + a(1, 1))
		d := math.Hypot(0.5*(a(0, 0)-a(1, 1)), a(0, 1))
		v = [3]float64{m + d, m - d, 0}
	} else {
		p1 := a(0, 1)*a(0, 1) + a(0, 2)*a(0, 2) + a(1, 2)*a(1, 2)
		q := (a(0, 0) + a(1, 1) + a(2, 2)) / 3
		if p1 == 0 {
			v = [3]float64{a(0, 0), a(1, 1), a(2, 2)}
		} else {
			p2 := (a(0, 0)-q)*(a(0, 0)-q) + (a(1, 1)-q)*(a(1, 1)-q) + (a(2, 2)-q)*(a(2, 2)-q) + 2*p1
			p := math.Sqrt(p2 / 6)
			var b transform.Mat
			for i := range 3 {
				for j := range 3 {
					b[i][j] = a(i, j) / p
				}
				b[i][i] -= q / p
			}
			r := math.Max(-1, math.Min(1, b.Det()/2))
			phi := math.Acos(r) / 3
			v[0] = q + 2*p*math.Cos(phi)
			v[2] = q + 2*p*math.Cos(phi+2*math.Pi/3)
			v[1] = 3*q - v[0] - v[2]
		}
	}
	sort.Sort(sort.Reverse(sort.Float64Slice(v[:])))
	for i := range v {
		v[i] = math.Max(v[i], 0)
	}
	return v
}

// sphereRule is a product quadrature over one quadrant of the unit circle
// (2-D) or one octant of the sphere (3-D), its weights summing to one. The
// integrand depends on the direction only through the squares of its
// components, so one quadrant or octant carries the whole integral, and it is
// smooth and even across their edges, where Gauss–Legendre rules converge
// fast.
type sphereRule struct {
	dim     int
	dirs    [][3]float64
	weights []float64
}

func newSphereRule(dim int) sphereRule { return newSphereRuleOrder(dim, 16, 12) }

func newSphereRuleOrder(dim, nAzimuth, nPolar int) sphereRule {
	r := sphereRule{dim: dim}
	phi := make([]float64, nAzimuth)
	wPhi := make([]float64, nAzimuth)
	quad.Legendre{}.FixedLocations(phi, wPhi, 0, math.Pi/2)
	if dim == 2 {
		for k, f := range phi {
			r.dirs = append(r.dirs, [3]float64{math.Cos(f), math.Sin(f), 0})
			r.weights = append(r.weights, wPhi[k]/(math.Pi/2))
		}
		return r
	}
	cosTheta := make([]float64, nPolar)
	wTheta := make([]float64, nPolar)
	quad.Legendre{}.FixedLocations(cosTheta, wTheta, 0, 1)
	for i, c := range cosTheta {
		s := math.Sqrt(1 - c*c)
		for k, f := range phi {
			r.dirs = append(r.dirs, [3]float64{s * math.Cos(f), s * math.Sin(f), c})
			r.weights = append(r.weights, wTheta[i]*wPhi[k]/(math.Pi/2))
		}
	}
	return r
}

// cdf is P(Σ λ_k z_k² ≤ x) and its derivative in x.
func (r sphereRule) cdf(lam [3]float64, x float64) (p, density float64) {
	for i, d := range r.dirs {
		q := lam[0]*d[0]*d[0] + lam[1]*d[1]*d[1] + lam[2]*d[2]*d[2]
		if q <= 0 {
			p += r.weights[i]
			continue
		}
		p += r.weights[i] * chiSquareCDF(r.dim, x/q)
		density += r.weights[i] * chiSquarePDF(r.dim, x/q) / q
	}
	return p, density
}

// quantile solves cdf(x) = p by Newton's method kept inside bounds that
// always hold: Q ≥ λ₁z₁² gives x ≥ λ₁·χ²₁(p), and Q ≤ λ₁·χ²_d gives
// x ≤ λ₁·χ²_d(p). A Newton step that leaves the bracket is replaced by
// bisection.
func (r sphereRule) quantile(lam [3]float64, p float64) float64 {
	lo := lam[0] * chiSquareQuantile(1, p)
	hi := lam[0] * chiSquareQuantile(r.dim, p)
	x := 0.5 * (lo + hi)
	for range 100 {
		f, df := r.cdf(lam, x)
		if f < p {
			lo = x
		} else {
			hi = x
		}
		next := x - (f-p)/df
		if !(next > lo && next < hi) {
			next = 0.5 * (lo + hi)
		}
		if math.Abs(next-x) <= 1e-12*x {
			return next
		}
		x = next
	}
	return x
}

// chiSquareCDF for 1, 2 or 3 degrees of freedom, in closed form.
func chiSquareCDF(k int, x float64) float64 {
	if x <= 0 {
		return 0
	}
	switch k {
	case 1:
		return math.Erf(math.Sqrt(x / 2))
	case 2:
		return -math.Expm1(-x / 2)
	default:
		return math.Erf(math.Sqrt(x/2)) - math.Sqrt(2*x/math.Pi)*math.Exp(-x/2)
	}
}

// chiSquarePDF is the density matching chiSquareCDF.
func chiSquarePDF(k int, x float64) float64 {
	if x <= 0 {
		return 0
	}
	switch k {
	case 1:
		return math.Exp(-x/2) / math.Sqrt(2*math.Pi*x)
	case 2:
		return 0.5 * math.Exp(-x/2)
	default:
		return math.Sqrt(x/(2*math.Pi)) * math.Exp(-x/2)
	}
}

// chiSquareQuantile is the p-quantile of the χ² distribution with k
// degrees of freedom.
func chiSquareQuantile(k int, p float64) float64 {
	return distuv.ChiSquared{K: float64(k)}.Quantile(p)
}

// Radius95 is the table of 95 % radii for dim dimensions, read from the
// values that NewRadiusTable computes, kept in radius_table.go so that no
// run pays for the integration (TestRadius95TableCurrent checks them).
func Radius95(dim int) *RadiusTable {
	t := &RadiusTable{dim: dim, p: 0.95}
	if dim == 2 {
		t.g = radius95Table2D()
	} else {
		t.g = radius95Table3D()
	}
	return t
}
