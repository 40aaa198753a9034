package transform

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// covLinearCase is a fitted linear map with its landmarks, for the tests of
// the covariance.
type covLinearCase struct {
	kind    Kind
	dim     int
	src     []Vec
	dst     []Vec
	weights []float64
	res     *Result
	pred    *LinearPredictor
}

// newCovLinearCase fits kind to n landmarks spread over ±200 µm around
// offset, mapped by a known map of that kind with 1 µm of noise.
func newCovLinearCase(t testing.TB, rng *rand.Rand, kind Kind, dim, n int, weighted bool, offset float64) *covLinearCase {
	t.Helper()
	truth := randomMap(rng, kind, dim, false, offset)
	c := &covLinearCase{kind: kind, dim: dim, src: randomPoints(rng, n, dim, offset, 200)}
	c.dst = make([]Vec, n)
	for i, p := range c.src {
		c.dst[i] = truth.Apply(p)
		for k := range dim {
			c.dst[i][k] += rng.NormFloat64()
		}
	}
	if weighted {
		c.weights = make([]float64, n)
		for i := range c.weights {
			c.weights[i] = 0.5 + 2*rng.Float64()
		}
	}
	c.refit(t)
	return c
}

func (c *covLinearCase) refit(t testing.TB) {
	t.Helper()
	res, err := Fit(c.kind, c.dim, c.src, c.dst, Options{Weights: c.weights})
	if err != nil {
		t.Fatal(err)
	}
	cp, err := NewCrossPredictor(res.Transform, c.src, c.weights)
	if err != nil {
		t.Fatal(err)
	}
	c.res, c.pred = res, cp.(*LinearPredictor)
}

// conditioned is F(x) − C(x, z)(F(z) + I)⁻¹C(z, x) on the dim axes.
func covConditioned(p CrossPredictor, dim int, x, z Vec) Mat {
	d := p.Factor(z)
	for k := range 3 {
		if k < dim {
			d[k][k]++
		} else {
			d[k][k] = 1
		}
	}
	inv, ok := d.Inverse()
	if !ok {
		panic("F(z) + I is singular")
	}
	cxz := p.CrossFactor(x, z)
	cux := cxz.Mul(inv).Mul(p.CrossFactor(z, x))
	f := p.Factor(x)
	for i := range dim {
		for j := range dim {
			f[i][j] -= cux[i][j]
		}
	}
	return f
}

func covFrobenius(m Mat) float64 {
	s := 0.0
	for i := range 3 {
		for j := range 3 {
			s += m[i][j] * m[i][j]
		}
	}
	return math.Sqrt(s)
}

func covDiff(a, b Mat) Mat {
	var d Mat
	for i := range 3 {
		for j := range 3 {
			d[i][j] = a[i][j] - b[i][j]
		}
	}
	return d
}

var linearCovarianceCases = []struct {
	kind     Kind
	dim      int
	weighted bool
}{
	{Translation, 3, false},
	{Translation, 2, true},
	{Rigid, 3, false},
	{Rigid, 3, true},
	{Rigid, 2, true},
	{Similarity, 3, true},
	{Similarity, 2, false},
	{Affine, 3, true},
	{Affine, 2, false},
}

// CrossFactor(x, x) is Factor(x), C(x, z) = C(z, x)ᵀ, and the scalar form
// of a translation or an affine map agrees with the matrix one.
func TestLinearCrossFactorConsistent(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 7))
	for _, tc := range linearCovarianceCases {
		t.Run(fmt.Sprintf("%s %d-D weighted=%t", tc.kind, tc.dim, tc.weighted), func(t *testing.T) {
			c := newCovLinearCase(t, rng, tc.kind, tc.dim, 10, tc.weighted, 3e4)
			xs := randomPoints(rng, 20, tc.dim, 3e4, 500)
			sc, scalar := AsScalar(c.pred)
			if want := tc.kind == Translation || tc.kind == Affine; scalar != want {
				t.Fatalf("AsScalar says %t for a %s map", scalar, tc.kind)
			}
			var vars, cross []float64
			if scalar {
				vars = make([]float64, len(xs))
				cross = make([]float64, len(xs)*len(xs))
				sc.VarianceAll(xs, vars)
				sc.CrossAll(xs, xs, cross)
			}
			for i, x := range xs {
				f := c.pred.Factor(x)
				if d := covFrobenius(covDiff(c.pred.CrossFactor(x, x), f)); d > 1e-12*covFrobenius(f) {
					t.Fatalf("CrossFactor(x, x) differs from Factor(x) by %.3g", d)
				}
				for j, z := range xs {
					a, b := c.pred.CrossFactor(x, z), c.pred.CrossFactor(z, x).T()
					if d := covFrobenius(covDiff(a, b)); d > 1e-12*covFrobenius(f) {
						t.Fatalf("C(x, z) is not C(z, x)ᵀ (off by %.3g)", d)
					}
					if scalar && math.Abs(cross[i*len(xs)+j]-a[0][0]) > 1e-12*f[0][0] {
						t.Fatalf("CrossAll %.12g, CrossFactor %.12g", cross[i*len(xs)+j], a[0][0])
					}
					if tc.dim == 2 && (a[2][2] != 0 || a[0][2] != 0 || a[2][0] != 0) {
						t.Fatal("2-D cross factor has a z entry")
					}
				}
				if scalar && math.Abs(vars[i]-f[0][0]) > 1e-12*f[0][0] {
					t.Fatalf("VarianceAll %.12g, Factor %.12g", vars[i], f[0][0])
				}
			}
		})
	}
}

// The conditioning formula with ν = 1 is the refit with one more landmark
// of mean weight (Sherman–Morrison–Woodbury on the normal matrix): any
// target for a translation or an affine map, whose factors do not depend on
// the targets; for a rigid motion or a similarity the target the fit
// predicts, which leaves the fitted map and so the linearisation unchanged.
func TestLinearConditioningEqualsRefit(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 55))
	for _, tc := range linearCovarianceCases {
		t.Run(fmt.Sprintf("%s %d-D weighted=%t", tc.kind, tc.dim, tc.weighted), func(t *testing.T) {
			c := newCovLinearCase(t, rng, tc.kind, tc.dim, 9, tc.weighted, 2e4)
			xs := randomPoints(rng, 25, tc.dim, 2e4, 600)
			for _, z := range randomPoints(rng, 4, tc.dim, 2e4, 800) {
				target := c.res.Transform.Apply(z)
				if tc.kind == Translation || tc.kind == Affine {
					target = target.Add(Vec{40 * rng.NormFloat64(), -25, 300})
					if tc.dim == 2 {
						target[2] = 0
					}
				}
				grown := &covLinearCase{kind: c.kind, dim: c.dim, src: append(append([]Vec(nil), c.src...), z), dst: append(append([]Vec(nil), c.dst...), target)}
				if c.weights != nil {
					mean := 0.0
					for _, w := range c.weights {
						mean += w
					}
					grown.weights = append(append([]float64(nil), c.weights...), mean/float64(len(c.weights)))
				}
				grown.refit(t)
				for _, x := range xs {
					want := grown.pred.Factor(x)
					got := covConditioned(c.pred, tc.dim, x, z)
					if d := covFrobenius(covDiff(got, want)); d > 1e-8*covFrobenius(want) {
						t.Fatalf("after a landmark at %v: updated F(%v) = %v, refit %v (off by %.3g)", z, x, got, want, d)
					}
				}
			}
		})
	}
}

// Over many draws of the target noise (s = 1 µm² on every axis), the
// errors of the fitted map at two points have the covariance CrossFactor,
// the cross term of the Fitzpatrick–West–Maurer (1998) analysis; checked
// for the rigid motion, whose cross factor is a full matrix, and the affine
// map.
func TestLinearCrossFactorMonteCarlo(t *testing.T) {
	rng := rand.New(rand.NewPCG(77, 1))
	const draws = 4000
	for _, kind := range []Kind{Rigid, Affine} {
		t.Run(string(kind), func(t *testing.T) {
			truth := randomMap(rng, kind, 3, false, 5e3)
			src := randomPoints(rng, 8, 3, 5e3, 150)
			exact := applyAll(truth, src)
			x, z := Vec{5e3 + 100, 5e3 - 40, 5e3 + 300}, Vec{5e3 - 250, 5e3 + 90, 5e3 - 20}
			res, err := Fit(kind, 3, src, exact, Options{})
			if err != nil {
				t.Fatal(err)
			}
			cp, err := NewCrossPredictor(res.Transform, src, nil)
			if err != nil {
				t.Fatal(err)
			}
			want := cp.CrossFactor(x, z)
			var sum Mat
			dst := make([]Vec, len(src))
			for range draws {
				for i := range src {
					dst[i] = exact[i].Add(Vec{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()})
				}
				r, err := Fit(kind, 3, src, dst, Options{})
				if err != nil {
					t.Fatal(err)
				}
				ex := r.Transform.Apply(x).Sub(truth.Apply(x))
				ez := r.Transform.Apply(z).Sub(truth.Apply(z))
				for i := range 3 {
					for j := range 3 {
						sum[i][j] += ex[i] * ez[j] / draws
					}
				}
			}
			fx, fz := cp.Factor(x), cp.Factor(z)
			se := math.Sqrt(trace(fx) * trace(fz) / 9 / draws)
			for i := range 3 {
				for j := range 3 {
					if d := math.Abs(sum[i][j] - want[i][j]); d > 5*se+0.02*math.Abs(want[i][j]) {
						t.Errorf("Cov(e(x)_%d, e(z)_%d) = %.4f over %d draws, CrossFactor %.4f (standard error %.4f)", i, j, sum[i][j], draws, want[i][j], se)
					}
				}
			}
		})
	}
}
