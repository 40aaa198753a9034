package transform

import (
	"encoding/json"
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"sync"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// smoothWarp is a smooth, non-affine map of a box of the given extent at
// origin: a slight rotation and stretch plus sinusoidal displacements of a
// few per cent of the extent.
func smoothWarp(p, origin Vec, extent float64) Vec {
	t := p.Sub(origin).Scale(1 / extent)
	d := Vec{
		0.03*math.Sin(2.1*t[1]+0.4) + 0.02*t[2]*t[0],
		0.025*math.Cos(1.7*t[0]-0.3*t[2]) + 0.01*t[1]*t[1],
		0.02*math.Sin(1.3*t[0]+1.1*t[1]) - 0.015*t[2]*t[2],
	}
	a := Mat{{1.02, -0.05, 0.01}, {0.05, 0.99, 0.02}, {-0.01, -0.02, 1.01}}
	return a.MulVec(t).Add(d).Scale(extent).Add(origin).Add(Vec{12, -7, 3})
}

// warpCase is a landmark set for the spline tests.
type warpCase struct {
	name      string
	dim       int
	n         int
	origin    float64 // added to every source and target coordinate, µm
	smoothing float64
	weighted  bool
	noise     float64 // SD of target noise, µm
}

// pairs draws the case's landmarks: sources uniform in a 500 µm box (z flat
// in 2-D) at the origin, targets through smoothWarp plus noise, and, when
// weighted, precisions spread over a factor of ten.
func (c warpCase) pairs(seed uint64) (src, dst []Vec, w []float64) {
	rng := rand.New(rand.NewPCG(seed, uint64(c.n)))
	o := Vec{c.origin, c.origin, c.origin}
	if c.dim == 2 {
		o[2] = 0
	}
	for range c.n {
		p := Vec{500 * rng.Float64(), 500 * rng.Float64(), 500 * rng.Float64()}.Add(o)
		q := smoothWarp(p, o, 500).Add(Vec{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}.Scale(c.noise))
		if c.dim == 2 {
			p[2], q[2] = 0, 0
		}
		src, dst = append(src, p), append(dst, q)
		if c.weighted {
			w = append(w, math.Pow(10, rng.Float64()))
		}
	}
	return src, dst, w
}

// directSystem builds the contract's bordered matrix M = [[K + S·D, P],
// [Pᵀ, 0]] in raw micrometre coordinates.
func directSystem(dim int, src []Vec, smoothing float64, weights []float64) *mat.Dense {
	n, m := len(src), dim+1
	mean := 0.0
	for _, w := range weights {
		mean += w / float64(n)
	}
	a := mat.NewDense(n+m, n+m, nil)
	for i := range n {
		for j := range n {
			a.Set(i, j, directKernel(dim, src[i].Sub(src[j]).Norm()))
		}
		d := 1.0
		if weights != nil {
			d = mean / weights[i]
		}
		a.Set(i, i, a.At(i, i)+smoothing*d)
		a.Set(i, n, 1)
		a.Set(n, i, 1)
		for k := range dim {
			a.Set(i, n+1+k, src[i][k])
			a.Set(n+1+k, i, src[i][k])
		}
	}
	return a
}

// directKernel is the contract's φ(r), r in µm.
func directKernel(dim int, r float64) float64 {
	if dim == 3 {
		return -r
	}
	if r == 0 {
		return 0
	}
	return r * r * math.Log(r)
}

// directSpline solves the contract's bordered system in raw micrometre
// coordinates with a dense LU factorisation — no centring, no scaling, no
// projection — and returns the fitted function, an independent check of the
// normalised solve.
func directSpline(t *testing.T, dim int, src, dst []Vec, smoothing float64, weights []float64) func(Vec) Vec {
	t.Helper()
	n := len(src)
	a := directSystem(dim, src, smoothing, weights)
	b := mat.NewDense(n+dim+1, dim, nil)
	for i := range n {
		for k := range dim {
			b.Set(i, k, dst[i][k])
		}
	}
	var x mat.Dense
	if err := x.Solve(a, b); err != nil {
		t.Fatalf("direct solve: %v", err)
	}
	return func(p Vec) Vec {
		out := p
		for k := range dim {
			s := x.At(n, k)
			for l := range dim {
				s += x.At(n+1+l, k) * p[l]
			}
			for j := range n {
				s += x.At(j, k) * directKernel(dim, p.Sub(src[j]).Norm())
			}
			out[k] = s
		}
		return out
	}
}

func fitSplineT(t *testing.T, dim int, src, dst []Vec, opt Options) (*Result, *Spline) {
	t.Helper()
	res, err := Fit(TPS, dim, src, dst, opt)
	if err != nil {
		t.Fatalf("Fit: %v", err)
	}
	sp, ok := res.Transform.(*Spline)
	if !ok {
		t.Fatalf("Fit(TPS) returned a %T", res.Transform)
	}
	return res, sp
}

// queryPoints draws points in and a little around the case's box.
func (c warpCase) queryPoints(seed uint64, k int) []Vec {
	rng := rand.New(rand.NewPCG(seed, 99))
	var q []Vec
	for range k {
		p := Vec{-50 + 600*rng.Float64(), -50 + 600*rng.Float64(), -50 + 600*rng.Float64()}.Add(Vec{c.origin, c.origin, c.origin})
		if c.dim == 2 {
			p[2] = 0
		}
		q = append(q, p)
	}
	return q
}

func TestSplineInterpolatesAtZeroSmoothing(t *testing.T) {
	for _, c := range []warpCase{
		{name: "3-D near origin", dim: 3, n: 40},
		{name: "3-D at 1e5 µm", dim: 3, n: 40, origin: 1e5},
		{name: "2-D near origin", dim: 2, n: 40},
		{name: "2-D at 1e5 µm", dim: 2, n: 40, origin: 1e5},
		{name: "3-D weighted", dim: 3, n: 25, weighted: true},
		{name: "3-D affine minimum", dim: 3, n: 4},
	} {
		t.Run(c.name, func(t *testing.T) {
			src, dst, w := c.pairs(1)
			res, _ := fitSplineT(t, c.dim, src, dst, Options{Weights: w})
			for i, r := range res.Residuals {
				if r.Norm() > 1e-9*500 {
					t.Errorf("pair %d: residual %v µm at S = 0", i, r)
				}
			}
		})
	}
}

// TestSplineMatchesDirectSolve checks the normalised, projected solve
// against the contract's system solved as it is written, in micrometres.
func TestSplineMatchesDirectSolve(t *testing.T) {
	for _, c := range []warpCase{
		{name: "3-D S=0", dim: 3, n: 30, noise: 1},
		{name: "3-D S=20", dim: 3, n: 30, noise: 1, smoothing: 20},
		{name: "3-D S=20 weighted at 1e4 µm", dim: 3, n: 30, noise: 1, smoothing: 20, weighted: true, origin: 1e4},
		{name: "2-D S=0", dim: 2, n: 30, noise: 1},
		{name: "2-D S=5e3", dim: 2, n: 30, noise: 1, smoothing: 5e3},
		// Raw µm at 1e4 µm leave LU without digits in 2-D; the SciPy
		// reference covers offsets there.
		{name: "2-D S=5e3 weighted at 2e3 µm", dim: 2, n: 30, noise: 1, smoothing: 5e3, weighted: true, origin: 2e3},
	} {
		t.Run(c.name, func(t *testing.T) {
			src, dst, w := c.pairs(2)
			res, sp := fitSplineT(t, c.dim, src, dst, Options{Smoothing: c.smoothing, Weights: w, LeaveOneOut: true})
			direct := directSpline(t, c.dim, src, dst, c.smoothing, w)
			// Result.LOOFactor is 1/(M⁻¹)_ii of the micrometre system.
			var inv mat.Dense
			if err := inv.Inverse(directSystem(c.dim, src, c.smoothing, w)); err != nil {
				t.Fatalf("direct inverse: %v", err)
			}
			for i, f := range res.LOOFactor {
				if want := 1 / inv.At(i, i); math.Abs(f-want) > 1e-7*math.Abs(want) {
					t.Errorf("LOOFactor[%d] = %.10g, direct inverse gives %.10g", i, f, want)
				}
			}
			if len(res.LOOFactor) != len(src) {
				t.Errorf("%d leave-one-out factors for %d pairs", len(res.LOOFactor), len(src))
			}
			for _, p := range c.queryPoints(3, 50) {
				got, want := sp.Apply(p), direct(p)
				if d := got.Sub(want).Norm(); d > 1e-7*500 {
					t.Errorf("at %v: spline %v, direct solve %v (|Δ| = %.3g µm)", p, got, want, d)
				}
			}
		})
	}
}

func TestSplineReproducesAffineMap(t *testing.T) {
	a := Mat{{1.1, 0.2, -0.05}, {-0.15, 0.95, 0.1}, {0.03, -0.08, 1.05}}
	off := Vec{250, -80, 40}
	for _, c := range []warpCase{
		{name: "3-D S=0", dim: 3, n: 30},
		{name: "3-D S=50", dim: 3, n: 30, smoothing: 50},
		{name: "3-D S=1e6 weighted", dim: 3, n: 30, smoothing: 1e6, weighted: true},
		{name: "3-D S=50 at 1e5 µm", dim: 3, n: 30, smoothing: 50, origin: 1e5},
		{name: "2-D S=0", dim: 2, n: 30},
		{name: "2-D S=1e4", dim: 2, n: 30, smoothing: 1e4},
		{name: "2-D S=1e8 weighted at 1e5 µm", dim: 2, n: 30, smoothing: 1e8, weighted: true, origin: 1e5},
	} {
		t.Run(c.name, func(t *testing.T) {
			src, _, w := c.pairs(4)
			am := a
			if c.dim == 2 {
				am[0][2], am[1][2], am[2] = 0, 0, Vec{0, 0, 1}
			}
			o := off
			if c.dim == 2 {
				o[2] = 0
			}
			dst := make([]Vec, len(src))
			for i, p := range src {
				dst[i] = am.MulVec(p).Add(o)
			}
			res, sp := fitSplineT(t, c.dim, src, dst, Options{Smoothing: c.smoothing, Weights: w, LeaveOneOut: true})
			tol := 1e-9 * (500 + c.origin)
			for _, p := range c.queryPoints(5, 30) {
				if d := sp.Apply(p).Sub(am.MulVec(p).Add(o)).Norm(); d > tol {
					t.Errorf("at %v: off the affine map by %.3g µm", p, d)
				}
			}
			for i := range src {
				if res.Residuals[i].Norm() > tol || res.LOO[i].Norm() > tol {
					t.Errorf("pair %d: residual %v, leave-one-out %v µm for an affine map", i, res.Residuals[i], res.LOO[i])
				}
			}
			if d := maxAbsDiff(sp.Matrix, am); d > 1e-9 {
				t.Errorf("affine part %v, want %v", sp.Matrix, am)
			}
		})
	}
}

// TestSplineAddedLandmarkOnMap: at S = 0 the spline is the interpolant of
// least bending energy (Duchon 1977), so a pair that already lies on it
// leaves it unchanged.
func TestSplineAddedLandmarkOnMap(t *testing.T) {
	for _, c := range []warpCase{
		{name: "3-D", dim: 3, n: 25, noise: 2},
		{name: "2-D", dim: 2, n: 25, noise: 2},
		{name: "3-D at 1e5 µm", dim: 3, n: 25, noise: 2, origin: 1e5},
	} {
		t.Run(c.name, func(t *testing.T) {
			src, dst, _ := c.pairs(6)
			_, sp := fitSplineT(t, c.dim, src, dst, Options{})
			extra := c.queryPoints(7, 1)[0]
			src2 := append(append([]Vec(nil), src...), extra)
			dst2 := append(append([]Vec(nil), dst...), sp.Apply(extra))
			_, sp2 := fitSplineT(t, c.dim, src2, dst2, Options{})
			for _, p := range c.queryPoints(8, 40) {
				if d := sp.Apply(p).Sub(sp2.Apply(p)).Norm(); d > 1e-8*500 {
					t.Errorf("at %v: the added landmark moved the map by %.3g µm", p, d)
				}
			}
		})
	}
}

// TestSplineLeaveOneOutMatchesRefits checks the closed form of Rippa (1999,
// Adv. Comput. Math. 11:193–210), extended to the affine part and S > 0,
// against N refits without each pair.
func TestSplineLeaveOneOutMatchesRefits(t *testing.T) {
	for _, c := range []warpCase{
		{name: "3-D S=0", dim: 3, n: 20, noise: 2},
		{name: "3-D S=30", dim: 3, n: 20, noise: 2, smoothing: 30},
		{name: "3-D S=30 weighted at 1e5 µm", dim: 3, n: 20, noise: 2, smoothing: 30, weighted: true, origin: 1e5},
		{name: "3-D S=0 weighted", dim: 3, n: 20, noise: 2, weighted: true},
		{name: "3-D minimum count", dim: 3, n: 5, noise: 2, smoothing: 3},
		{name: "2-D S=0", dim: 2, n: 20, noise: 2},
		{name: "2-D S=2e4", dim: 2, n: 20, noise: 2, smoothing: 2e4},
		{name: "2-D S=2e4 weighted at 1e5 µm", dim: 2, n: 20, noise: 2, smoothing: 2e4, weighted: true, origin: 1e5},
	} {
		t.Run(c.name, func(t *testing.T) {
			src, dst, w := c.pairs(9)
			res, _ := fitSplineT(t, c.dim, src, dst, Options{Smoothing: c.smoothing, Weights: w, LeaveOneOut: true})
			meanW := 0.0
			for _, x := range w {
				meanW += x / float64(len(w))
			}
			for i := range src {
				rs := append(append([]Vec(nil), src[:i]...), src[i+1:]...)
				rd := append(append([]Vec(nil), dst[:i]...), dst[i+1:]...)
				opt := Options{Smoothing: c.smoothing}
				if w != nil {
					// Keep each remaining pair's smoothing S·w̄/w_j with
					// w̄ over all N pairs, as the closed form does.
					opt.Weights = append(append([]float64(nil), w[:i]...), w[i+1:]...)
					meanR := 0.0
					for _, x := range opt.Weights {
						meanR += x / float64(len(opt.Weights))
					}
					opt.Smoothing = c.smoothing * meanW / meanR
				}
				_, refit := fitSplineT(t, c.dim, rs, rd, opt)
				want := dst[i].Sub(refit.Apply(src[i]))
				if d := res.LOO[i].Sub(want).Norm(); d > 1e-8*(1+want.Norm()) {
					t.Errorf("pair %d: leave-one-out %v µm, refit says %v µm", i, res.LOO[i], want)
				}
			}
		})
	}
}

func TestSplineRefusesSingularInput(t *testing.T) {
	grid := func(dim int, f func(x, y float64) Vec) []Vec {
		var p []Vec
		for i := range 4 {
			for j := range 4 {
				p = append(p, f(float64(i)*100, float64(j)*100))
			}
		}
		return p
	}
	square := grid(2, func(x, y float64) Vec { return Vec{x, y, 0} })
	cube := grid(3, func(x, y float64) Vec { return Vec{x, y, math.Mod(x*y, 170)} })
	withDuplicate := func(p []Vec, i, j int, eps float64) []Vec {
		q := append([]Vec(nil), p...)
		q[j] = q[i].Add(Vec{eps, 0, 0})
		return q
	}
	shifted := func(p []Vec) []Vec {
		q := make([]Vec, len(p))
		for i := range p {
			q[i] = p[i].Add(Vec{5, 3, 0})
		}
		return q
	}
	cases := []struct {
		name      string
		dim       int
		src       []Vec
		smoothing float64
		loo       bool
		want      string // part of the message; empty means the fit works
	}{
		{"2-D duplicate at S=0", 2, withDuplicate(square, 3, 7, 0), 0, false, "pairs 3 and 7 coincide"},
		{"3-D duplicate at S=0", 3, withDuplicate(cube, 2, 9, 0), 0, false, "pairs 2 and 9 coincide"},
		{"3-D duplicate at 1e-12 µm", 3, withDuplicate(cube, 2, 9, 1e-12), 0, false, "coincide"},
		{"3-D duplicate at S>0 is fine", 3, withDuplicate(cube, 2, 9, 0), 5, false, ""},
		{"2-D duplicate at S>0 is fine", 2, withDuplicate(square, 3, 7, 0), 5, true, ""},
		{"2-D on a line", 2, []Vec{{0, 0, 0}, {1, 2, 0}, {2, 4, 0}, {3, 6, 0}, {5, 10, 0}}, 0, false, "lie on a line"},
		{"3-D on a tilted plane", 3, grid(3, func(x, y float64) Vec { return Vec{x, y, 0.3*x - 0.7*y + 5} }), 1, false, "lie on a plane"},
		{"3-D on a line", 3, grid(3, func(x, y float64) Vec { return Vec{x + y, 2 * (x + y), -(x + y)} }), 0, false, "lie on a plane"},
		{"3-D too few", 3, cube[:3], 0, false, "at least 4"},
		{"3-D too few for leave-one-out", 3, cube[:4], 0, true, "at least 5"},
		{"all coincide", 3, []Vec{{7, 7, 7}, {7, 7, 7}, {7, 7, 7}, {7, 7, 7}, {7, 7, 7}}, 1, false, "coincide"},
		{"leave-one-out with a pivotal pair", 2, []Vec{{0, 0, 0}, {100, 0, 0}, {200, 0, 0}, {300, 0, 0}, {150, 90, 0}}, 0, true, "alone fixes a direction"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Fit(TPS, c.dim, c.src, shifted(c.src), Options{Smoothing: c.smoothing, LeaveOneOut: c.loo})
			switch {
			case c.want == "" && err != nil:
				t.Fatalf("unexpected error: %v", err)
			case c.want != "" && err == nil:
				t.Fatalf("no error, want one containing %q", c.want)
			case c.want != "" && !strings.Contains(err.Error(), c.want):
				t.Fatalf("error %q does not contain %q", err, c.want)
			}
		})
	}
}

// TestSplineJacobian compares the analytic Jacobian with central
// differences away from the nodes.
func TestSplineJacobian(t *testing.T) {
	for _, c := range []warpCase{
		{name: "3-D", dim: 3, n: 30, noise: 3, smoothing: 5},
		{name: "3-D at 1e5 µm", dim: 3, n: 30, noise: 3, origin: 1e5},
		{name: "2-D", dim: 2, n: 30, noise: 3},
		{name: "2-D at 1e5 µm", dim: 2, n: 30, noise: 3, smoothing: 100, origin: 1e5},
	} {
		t.Run(c.name, func(t *testing.T) {
			src, dst, _ := c.pairs(10)
			_, sp := fitSplineT(t, c.dim, src, dst, Options{Smoothing: c.smoothing})
			const h = 1e-3 // µm
			for _, p := range c.queryPoints(11, 20) {
				j := sp.Jacobian(p)
				for col := range c.dim {
					e := Vec{}
					e[col] = h
					fd := sp.Apply(p.Add(e)).Sub(sp.Apply(p.Sub(e))).Scale(1 / (2 * h))
					for row := range 3 {
						if d := math.Abs(fd[row] - j[row][col]); d > 1e-5 {
							t.Errorf("at %v: J[%d][%d] = %.9f, central difference %.9f", p, row, col, j[row][col], fd[row])
						}
					}
				}
				if c.dim == 2 && (j[2] != Vec{0, 0, 1} || j[0][2] != 0 || j[1][2] != 0) {
					t.Errorf("2-D Jacobian %v does not leave z alone", j)
				}
			}
		})
	}
}

func TestSplineInvertRoundTrip(t *testing.T) {
	for _, c := range []warpCase{
		{name: "3-D", dim: 3, n: 40, noise: 3},
		{name: "3-D at 1e5 µm", dim: 3, n: 40, noise: 3, smoothing: 10, origin: 1e5},
		{name: "2-D", dim: 2, n: 40, noise: 3},
		{name: "2-D at 1e5 µm", dim: 2, n: 40, noise: 3, origin: 1e5},
	} {
		t.Run(c.name, func(t *testing.T) {
			src, dst, _ := c.pairs(12)
			_, sp := fitSplineT(t, c.dim, src, dst, Options{Smoothing: c.smoothing})
			for _, p := range c.queryPoints(13, 50) {
				x, err := sp.Invert(sp.Apply(p))
				if err != nil {
					t.Fatalf("Invert(f(%v)): %v", p, err)
				}
				if d := x.Sub(p).Norm(); d > 1e-6 {
					t.Errorf("Invert(f(%v)) = %v, off by %.3g µm", p, x, d)
				}
			}
		})
	}
}

// foldedSpline is a 2-D grid of landmarks 100 µm apart, mapped to itself
// but for the one at (200, 200), which is dragged by drag µm along x: past
// its neighbour at (300, 200) the interpolating spline must fold.
func foldedSpline(t *testing.T, drag float64) *Spline {
	t.Helper()
	var src, dst []Vec
	for i := range 5 {
		for j := range 5 {
			p := Vec{float64(i) * 100, float64(j) * 100, 0}
			q := p
			if i == 2 && j == 2 {
				q[0] += drag
			}
			src, dst = append(src, p), append(dst, q)
		}
	}
	_, sp := fitSplineT(t, 2, src, dst, Options{})
	return sp
}

func TestSplineInvertFolded(t *testing.T) {
	sp := foldedSpline(t, 150)
	// Where f is singular or folds back the inverse is not unique: every
	// answer must either be a true, unfolded preimage or an error wrapping
	// ErrNoConvergence, and over the folded region some must be errors.
	failures := 0
	for i := range 41 {
		for j := range 41 {
			q := Vec{150 + 5*float64(i), 100 + 5*float64(j), 0}
			x, err := sp.Invert(q)
			if err != nil {
				if !errors.Is(err, ErrNoConvergence) {
					t.Fatalf("Invert(%v): error %v does not wrap ErrNoConvergence", q, err)
				}
				failures++
				continue
			}
			if d := sp.Apply(x).Sub(q).Norm(); d > 1e-6 {
				t.Errorf("Invert(%v) = %v, which maps %.3g µm away", q, x, d)
			}
			if det := sp.Jacobian(x).Det(); det <= 0 {
				t.Errorf("Invert(%v) = %v, where the spline folds (det %.3g)", q, x, det)
			}
		}
	}
	if failures == 0 {
		t.Error("no point of the folded region was refused")
	}

	// A spline that maps every pair onto the x axis has a singular affine
	// part and no preimage off that axis.
	var src, dst []Vec
	for _, p := range []Vec{{0, 0, 0}, {100, 0, 0}, {0, 100, 0}, {100, 100, 0}, {40, 70, 0}} {
		src, dst = append(src, p), append(dst, Vec{p[0] + 0.2*p[1], 0, 0})
	}
	_, flat := fitSplineT(t, 2, src, dst, Options{})
	if _, err := flat.Invert(Vec{50, 30, 0}); !errors.Is(err, ErrNoConvergence) {
		t.Errorf("Invert through a flattening spline: error %v, want ErrNoConvergence", err)
	}
}

func TestFoldCheck(t *testing.T) {
	for _, c := range []struct {
		name  string
		drag  float64
		folds bool
	}{
		{"landmark nudged by 20 µm", 20, false},
		{"landmark dragged past its neighbour", 150, true},
	} {
		t.Run(c.name, func(t *testing.T) {
			sp := foldedSpline(t, c.drag)
			minDet, at := FoldCheck(sp, Vec{0, 0, 0}, Vec{400, 400, 0}, 41)
			if (minDet <= 0) != c.folds {
				t.Fatalf("FoldCheck: min det %.3g at %v; want a fold: %t", minDet, at, c.folds)
			}
			if d := sp.Jacobian(at).Det(); d != minDet {
				t.Errorf("FoldCheck reports det %.6g at %v, where it is %.6g", minDet, at, d)
			}
			if c.folds && at.Sub(Vec{250, 200, 0}).Norm() > 100 {
				t.Errorf("fold found at %v, far from the dragged landmark", at)
			}
		})
	}
	// A 3-D affine map: the determinant is the same everywhere.
	l := &Linear{Model: Affine, D: 3, A: Mat{{2, 0, 0}, {0, 1, 0}, {0, 0, 0.5}}}
	if d, _ := FoldCheck(l, Vec{}, Vec{1, 1, 1}, 3); math.Abs(d-1) > 1e-15 {
		t.Errorf("FoldCheck of an affine map with det 1: %g", d)
	}
}

// TestSplineFileRoundTrip encodes a fitted spline as JSON, decodes and
// validates it, and checks the rebuilt spline maps every point alike.
func TestSplineFileRoundTrip(t *testing.T) {
	for _, c := range []warpCase{
		{name: "3-D weighted", dim: 3, n: 20, noise: 1, smoothing: 3, weighted: true, origin: 1e4},
		{name: "2-D", dim: 2, n: 20, noise: 1},
	} {
		t.Run(c.name, func(t *testing.T) {
			src, dst, w := c.pairs(14)
			_, sp := fitSplineT(t, c.dim, src, dst, Options{Smoothing: c.smoothing, Weights: w})
			b, err := json.Marshal(sp)
			if err != nil {
				t.Fatal(err)
			}
			var back Spline
			if err := json.Unmarshal(b, &back); err != nil {
				t.Fatal(err)
			}
			if err := back.Validate(); err != nil {
				t.Fatalf("validate: %v", err)
			}
			for _, p := range c.queryPoints(15, 20) {
				if got, want := back.Apply(p), sp.Apply(p); got != want {
					t.Errorf("at %v: decoded spline gives %v, fitted one %v", p, got, want)
				}
			}
		})
	}
}

func TestSplineValidateRefusesDamage(t *testing.T) {
	src, dst, _ := warpCase{dim: 3, n: 10, noise: 1}.pairs(16)
	_, good := fitSplineT(t, 3, src, dst, Options{})
	src2, dst2, _ := warpCase{dim: 2, n: 10, noise: 1}.pairs(16)
	_, good2 := fitSplineT(t, 2, src2, dst2, Options{})
	for _, c := range []struct {
		name   string
		base   *Spline
		damage func(s *Spline)
		want   string
	}{
		{"dimension", good, func(s *Spline) { s.Dimension = 4 }, "dimension 4"},
		{"missing weight", good, func(s *Spline) { s.Weights = s.Weights[1:] }, "10 nodes but 9 kernel weights"},
		{"too few nodes", good, func(s *Spline) { s.Nodes, s.Weights = s.Nodes[:3], s.Weights[:3] }, "at least 4"},
		{"zero scale", good, func(s *Spline) { s.Scale = 0 }, "scale 0"},
		{"NaN node", good, func(s *Spline) { s.Nodes[4][1] = math.NaN() }, "node 4"},
		{"infinite matrix", good, func(s *Spline) { s.Matrix[1][2] = math.Inf(1) }, "matrix entry (1,2)"},
		{"negative smoothing", good, func(s *Spline) { s.Smoothing = -1 }, "smoothing -1"},
		{"pair weights", good, func(s *Spline) { s.PairWeights = []float64{1, 2} }, "2 pair weights"},
		{"changed weight", good, func(s *Spline) { s.Weights[3][0] += 1 }, "side conditions"},
		{"2-D z weight", good2, func(s *Spline) { s.Weights[2][2] = 1 }, "z coordinate or weight"},
		{"2-D matrix", good2, func(s *Spline) { s.Matrix[2][2] = 2 }, "leave z alone"},
	} {
		t.Run(c.name, func(t *testing.T) {
			b, _ := json.Marshal(c.base)
			var s Spline
			if err := json.Unmarshal(b, &s); err != nil {
				t.Fatal(err)
			}
			c.damage(&s)
			err := s.Validate()
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("validate: %v, want an error containing %q", err, c.want)
			}
		})
	}
}

// TestSplineSystem checks the reusable factorised system on its own:
// solve against the bordered matrix built from kernelVector, the diagonal
// of M⁻¹'s top-left block against a dense inverse, and the rebuild from a
// Spline against the fit's weights.
func TestSplineSystem(t *testing.T) {
	for _, c := range []warpCase{
		{name: "3-D weighted", dim: 3, n: 15, smoothing: 4, weighted: true, noise: 1, origin: 1e4},
		{name: "2-D", dim: 2, n: 15, noise: 1},
		// Over 256 landmarks the triangular inverse runs on two cores.
		{name: "3-D large", dim: 3, n: 300, smoothing: 4, noise: 1},
	} {
		t.Run(c.name, func(t *testing.T) {
			src, dst, w := c.pairs(17)
			_, sp := fitSplineT(t, c.dim, src, dst, Options{Smoothing: c.smoothing, Weights: w})
			sys, err := sp.system()
			if err != nil {
				t.Fatal(err)
			}
			N, m := c.n, c.dim+1
			big := mat.NewDense(N+m, N+m, nil)
			k := make([]float64, N)
			for i, u := range sys.nodes {
				sys.kernelVector(u, k)
				for j := range N {
					big.Set(i, j, k[j])
				}
				d := 1.0
				if sys.penalty != nil {
					d = sys.penalty[i]
				}
				big.Set(i, i, big.At(i, i)+sys.smoothing*d)
				big.Set(i, N, 1)
				big.Set(N, i, 1)
				for l := range c.dim {
					big.Set(i, N+1+l, u[l])
					big.Set(N+1+l, i, u[l])
				}
			}
			rng := rand.New(rand.NewPCG(1, 1))
			f, g := mat.NewDense(N, 2, nil), mat.NewDense(m, 2, nil)
			for i := range N {
				f.Set(i, 0, rng.NormFloat64())
				f.Set(i, 1, rng.NormFloat64())
			}
			for i := range m {
				g.Set(i, 0, rng.NormFloat64())
				g.Set(i, 1, rng.NormFloat64())
			}
			cs, as := sys.solve(f, g)
			x := mat.NewDense(N+m, 2, nil)
			x.Stack(cs, as)
			var lhs mat.Dense
			lhs.Mul(big, x)
			rhs := mat.NewDense(N+m, 2, nil)
			rhs.Stack(f, g)
			if d := maxAbsDense(&lhs, rhs); d > 1e-9 {
				t.Errorf("solve: |M x − b| = %.3g", d)
			}
			if c.n <= 50 {
				var inv mat.Dense
				if err := inv.Inverse(big); err != nil {
					t.Fatal(err)
				}
				d, err := sys.inverseDiagonal()
				if err != nil {
					t.Fatal(err)
				}
				for i := range N {
					if math.Abs(d[i]-inv.At(i, i)) > 1e-9*math.Abs(inv.At(i, i)) {
						t.Errorf("(M⁻¹)_%d%d = %.12g, dense inverse %.12g", i, i, d[i], inv.At(i, i))
					}
				}
			} else {
				// Against columns of M⁻¹ from solve.
				d, err := sys.inverseDiagonal()
				if err != nil {
					t.Fatal(err)
				}
				for _, i := range []int{0, 1, N / 2, N - 1} {
					e := mat.NewDense(N, 1, nil)
					e.Set(i, 0, 1)
					col, _ := sys.solve(e, nil)
					if math.Abs(d[i]-col.At(i, 0)) > 1e-9*math.Abs(col.At(i, 0)) {
						t.Errorf("(M⁻¹)_%d%d = %.12g, solve gives %.12g", i, i, d[i], col.At(i, 0))
					}
				}
			}
			if c.smoothing == 0 {
				// At S = 0 the targets are the spline's own values at
				// the nodes, so the rebuilt system gives back its weights.
				q := mat.NewDense(N, c.dim, nil)
				for i, p := range sp.Nodes {
					v := sp.Apply(p)
					for l := range c.dim {
						q.Set(i, l, v[l])
					}
				}
				cw, _ := sys.solve(q, nil)
				for i := range N {
					for l := range c.dim {
						if d := math.Abs(cw.At(i, l) - sp.Weights[i][l]); d > 1e-8 {
							t.Errorf("rebuilt weight %d,%d = %g, fitted %g", i, l, cw.At(i, l), sp.Weights[i][l])
						}
					}
				}
			}
		})
	}
}

func maxAbsDense(a, b *mat.Dense) float64 {
	r, c := a.Dims()
	d := 0.0
	for i := range r {
		for j := range c {
			d = math.Max(d, math.Abs(a.At(i, j)-b.At(i, j)))
		}
	}
	return d
}

func TestSplineApplyAllMatchesApply(t *testing.T) {
	for _, c := range []warpCase{
		{name: "3-D", dim: 3, n: 50, noise: 1, origin: 1e5},
		{name: "2-D", dim: 2, n: 50, noise: 1},
	} {
		t.Run(c.name, func(t *testing.T) {
			src, dst, _ := c.pairs(18)
			_, sp := fitSplineT(t, c.dim, src, dst, Options{Smoothing: 1})
			pts := c.queryPoints(19, 5003) // not a multiple of any block size
			out := make([]Vec, len(pts))
			ApplyAll(sp, out, pts)
			for i, p := range pts {
				if want := sp.Apply(p); out[i].Sub(want).Norm() > 1e-9 {
					t.Fatalf("point %d: ApplyAll %v, Apply %v", i, out[i], want)
				}
			}
		})
	}
}

func TestSplineApplyDoesNotAllocate(t *testing.T) {
	src, dst, _ := warpCase{dim: 3, n: 30, noise: 1}.pairs(20)
	_, sp := fitSplineT(t, 3, src, dst, Options{})
	p := Vec{100, 200, 300}
	if n := testing.AllocsPerRun(100, func() { _ = sp.Apply(p) }); n != 0 {
		t.Errorf("Apply allocates %v times per point", n)
	}
}

// Fit with a non-finite smoothing or weight is refused before the spline
// sees it; the spline must not be reached with such input.
func TestSplineRefusesBadOptions(t *testing.T) {
	src, dst, _ := warpCase{dim: 3, n: 10}.pairs(21)
	for _, opt := range []Options{{Smoothing: math.NaN()}, {Smoothing: -2}, {Weights: make([]float64, 10)}} {
		if _, err := Fit(TPS, 3, src, dst, opt); err == nil {
			t.Errorf("Fit with %+v: no error", opt)
		}
	}
}

// A Spline built from its exported fields, never validated, maps, inverts
// and predicts exactly as the fitted one it copies; one whose fields break
// the spline's conditions is refused by every method that would read them,
// where before it mapped with its affine part only.
func TestSplineBuiltFromFields(t *testing.T) {
	for _, c := range []warpCase{{dim: 3, n: 12, noise: 1}, {dim: 2, n: 12, noise: 1}} {
		src, dst, _ := c.pairs(17)
		_, fitted := fitSplineT(t, c.dim, src, dst, Options{Smoothing: 0.5})
		built := &Spline{
			Dimension: fitted.Dimension, Centre: fitted.Centre, Scale: fitted.Scale,
			Nodes: fitted.Nodes, Weights: fitted.Weights, Matrix: fitted.Matrix,
			Offset: fitted.Offset, Smoothing: fitted.Smoothing,
		}
		for _, p := range c.queryPoints(18, 10) {
			if got, want := built.Apply(p), fitted.Apply(p); got != want {
				t.Errorf("%d-D Apply(%v): built %v, fitted %v", c.dim, p, got, want)
			}
			if got, want := built.Jacobian(p), fitted.Jacobian(p); got != want {
				t.Errorf("%d-D Jacobian(%v): built %v, fitted %v", c.dim, p, got, want)
			}
			q := fitted.Apply(p)
			got, gerr := built.Invert(q)
			want, werr := fitted.Invert(q)
			if got != want || (gerr == nil) != (werr == nil) {
				t.Errorf("%d-D Invert(%v): built %v (%v), fitted %v (%v)", c.dim, q, got, gerr, want, werr)
			}
		}
		if _, err := NewPredictor(built, nil, nil); err != nil {
			t.Errorf("%d-D NewPredictor of the built spline: %v", c.dim, err)
		}

		// The first uses may come from several goroutines at once.
		fresh := built.clone()
		pts := c.queryPoints(19, 8)
		got := make([]Vec, len(pts))
		var wg sync.WaitGroup
		for i, p := range pts {
			wg.Add(1)
			go func() {
				defer wg.Done()
				got[i] = fresh.Apply(p)
			}()
		}
		wg.Wait()
		for i, p := range pts {
			if want := fitted.Apply(p); got[i] != want {
				t.Errorf("%d-D concurrent first Apply(%v): %v, fitted %v", c.dim, p, got[i], want)
			}
		}

		bad := built.clone()
		bad.Weights = append([]Vec(nil), fitted.Weights...)
		bad.Weights[0][0] += 1
		const want = "side conditions"
		if err := bad.Validate(); err == nil || !strings.Contains(err.Error(), want) {
			t.Errorf("%d-D Validate of a broken spline: %v, want an error containing %q", c.dim, err, want)
		}
		if _, err := bad.Invert(fitted.Offset); err == nil || !strings.Contains(err.Error(), want) {
			t.Errorf("%d-D Invert of a broken spline: %v, want an error containing %q", c.dim, err, want)
		}
		if _, err := NewPredictor(bad, nil, nil); err == nil || !strings.Contains(err.Error(), want) {
			t.Errorf("%d-D NewPredictor of a broken spline: %v, want an error containing %q", c.dim, err, want)
		}
		for name, use := range map[string]func(){
			"Apply":             func() { bad.Apply(fitted.Centre) },
			"Jacobian":          func() { bad.Jacobian(fitted.Centre) },
			"ApplyWithJacobian": func() { ApplyWithJacobian(bad, fitted.Centre) },
		} {
			func() {
				defer func() {
					r := recover()
					if s, _ := r.(string); !strings.Contains(s, want) {
						t.Errorf("%d-D %s of a broken spline: recovered %v, want a panic containing %q", c.dim, name, r, want)
					}
				}()
				use()
			}()
		}
	}
}
