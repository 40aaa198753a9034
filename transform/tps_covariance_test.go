package transform

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// covPairs returns n pairs spread over a 400 µm box at offset, mapped by a
// smooth warp with 1 µm of noise.
func covPairs(rng *rand.Rand, n, dim int, offset float64) (src, dst []Vec) {
	src, dst = make([]Vec, n), make([]Vec, n)
	for i := range n {
		for k := range dim {
			src[i][k] = offset + 400*rng.Float64()
		}
		for k := range dim {
			dst[i][k] = 0.9*src[i][k] + 6*math.Sin(src[i][(k+1)%dim]/80) + rng.NormFloat64()
		}
	}
	return src, dst
}

// covPoints returns n points in the box [offset−100, offset+500) µm.
func covPoints(rng *rand.Rand, n, dim int, offset float64) []Vec {
	xs := make([]Vec, n)
	for i := range xs {
		for k := range dim {
			xs[i][k] = offset - 100 + 600*rng.Float64()
		}
	}
	return xs
}

// denseCross is φ(|x − z|) − v_xᵀM⁻¹v_z computed from the bordered system
// of the contract in micrometres with a dense inverse: the reference for
// the factored covariance.
func denseCross(t *testing.T, dim int, nodes []Vec, smoothing float64, weights []float64, xs, zs []Vec) *mat.Dense {
	t.Helper()
	N, m := len(nodes), dim+1
	phi := func(r float64) float64 {
		if dim == 3 {
			return -r
		}
		if r == 0 {
			return 0
		}
		return r * r * math.Log(r)
	}
	mean := 1.0
	if weights != nil {
		mean = 0
		for _, w := range weights {
			mean += w
		}
		mean /= float64(N)
	}
	M := mat.NewDense(N+m, N+m, nil)
	for i := range N {
		for j := range N {
			M.Set(i, j, phi(nodes[i].Sub(nodes[j]).Norm()))
		}
		d := 1.0
		if weights != nil {
			d = mean / weights[i]
		}
		M.Set(i, i, smoothing*d)
		M.Set(i, N, 1)
		M.Set(N, i, 1)
		for l := range dim {
			M.Set(i, N+1+l, nodes[i][l])
			M.Set(N+1+l, i, nodes[i][l])
		}
	}
	border := func(ps []Vec) *mat.Dense {
		v := mat.NewDense(N+m, len(ps), nil)
		for c, p := range ps {
			for j := range N {
				v.Set(j, c, phi(p.Sub(nodes[j]).Norm()))
			}
			v.Set(N, c, 1)
			for l := range dim {
				v.Set(N+1+l, c, p[l])
			}
		}
		return v
	}
	vx, vz := border(xs), border(zs)
	var sol mat.Dense
	if err := sol.Solve(M, vz); err != nil {
		t.Fatal(err)
	}
	var out mat.Dense
	out.Mul(vx.T(), &sol)
	for i, x := range xs {
		for j, z := range zs {
			out.Set(i, j, phi(x.Sub(z).Norm())-out.At(i, j))
		}
	}
	return &out
}

func covSpline(t testing.TB, dim int, src, dst []Vec, smoothing float64, w []float64) (*Spline, ScalarCrossPredictor) {
	res, err := Fit(TPS, dim, src, dst, Options{Smoothing: smoothing, Weights: w})
	if err != nil {
		t.Fatal(err)
	}
	cp, err := NewCrossPredictor(res.Transform, src, w)
	if err != nil {
		t.Fatal(err)
	}
	sp, ok := AsScalar(cp)
	if !ok {
		t.Fatalf("the spline's covariance is not scalar: %T", cp)
	}
	return res.Transform.(*Spline), sp
}

func covWeights(rng *rand.Rand, n int) []float64 {
	w := make([]float64, n)
	for i := range w {
		w[i] = 0.5 + rng.Float64()
	}
	return w
}

// The factored covariance equals the dense φ(|x − z|) − v_xᵀM⁻¹v_z of the
// micrometre system, in 2-D and 3-D, with and without smoothing and
// weights, near the origin and near 1e4 µm; CrossFactor agrees with
// CrossAll and, at x = z, with Factor.
func TestSplineCrossMatchesDense(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 3))
	for _, tc := range []struct {
		name      string
		dim       int
		nodes     int
		smoothing float64
		weighted  bool
		offset    float64
	}{
		{"3-D interpolating", 3, 30, 0, false, 0},
		{"3-D smoothed weighted", 3, 30, 40, true, 0},
		{"3-D far from the origin", 3, 30, 10, false, 1e4},
		{"3-D beyond the neighbourhood size", 3, 90, 5, false, 200},
		{"2-D interpolating", 2, 25, 0, false, 0},
		{"2-D smoothed weighted off the origin", 2, 25, 2000, true, 500},
	} {
		t.Run(tc.name, func(t *testing.T) {
			src, dst := covPairs(rng, tc.nodes, tc.dim, tc.offset)
			var w []float64
			if tc.weighted {
				w = covWeights(rng, len(src))
			}
			_, sp := covSpline(t, tc.dim, src, dst, tc.smoothing, w)
			xs := covPoints(rng, 40, tc.dim, tc.offset)
			zs := append(covPoints(rng, 30, tc.dim, tc.offset), src[0], xs[3])
			want := denseCross(t, tc.dim, src, tc.smoothing, w, xs, zs)
			got := make([]float64, len(xs)*len(zs))
			sp.CrossAll(xs, zs, got)
			// The covariances are differences of numbers of the size of
			// the kernel over the box; compare on that scale.
			scale := 0.0
			for i := range xs {
				scale = math.Max(scale, math.Abs(want.At(i, i%len(zs))))
			}
			for i, x := range xs {
				for j, z := range zs {
					g, wv := got[i*len(zs)+j], want.At(i, j)
					if math.Abs(g-wv) > 1e-8*scale+1e-9*math.Abs(wv) {
						t.Fatalf("C(%v, %v) = %.12g, dense %.12g", x, z, g, wv)
					}
					if f := sp.CrossFactor(x, z); math.Abs(f[0][0]-g) > 1e-12*scale || f[1][1] != f[0][0] || f[0][1] != 0 {
						t.Fatalf("CrossFactor %v disagrees with CrossAll %.12g", f, g)
					}
				}
			}
			vars := make([]float64, len(xs))
			sp.VarianceAll(xs, vars)
			self := make([]float64, len(xs)*len(xs))
			sp.CrossAll(xs, xs, self)
			for i, x := range xs {
				f := sp.Factor(x)[0][0]
				if vars[i] != f {
					t.Fatalf("VarianceAll %.12g, Factor %.12g", vars[i], f)
				}
				if d := self[i*len(xs)+i]; math.Abs(d-f) > 1e-9*scale {
					t.Fatalf("C(x, x) = %.12g but σ²(x) = %.12g", d, f)
				}
			}
		})
	}
}

// A covariance is positive semidefinite: the matrix of C over any set of
// points has no negative eigenvalue beyond rounding, and so
// |C(x, z)| ≤ σ(x)σ(z).
func TestSplineCrossPositiveSemidefinite(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 40))
	for _, dim := range []int{2, 3} {
		src, dst := covPairs(rng, 35, dim, 100)
		_, sp := covSpline(t, dim, src, dst, 3, nil)
		xs := covPoints(rng, 60, dim, 100)
		c := make([]float64, len(xs)*len(xs))
		sp.CrossAll(xs, xs, c)
		sym := mat.NewSymDense(len(xs), nil)
		for i := range xs {
			for j := i; j < len(xs); j++ {
				sym.SetSym(i, j, 0.5*(c[i*len(xs)+j]+c[j*len(xs)+i]))
			}
		}
		var eig mat.EigenSym
		if !eig.Factorize(sym, false) {
			t.Fatal("eigendecomposition failed")
		}
		vals := eig.Values(nil)
		if low, high := vals[0], vals[len(vals)-1]; low < -1e-9*high {
			t.Errorf("%d-D: smallest eigenvalue %.3g against largest %.3g", dim, low, high)
		}
	}
}

// The key identity of suggest: the exact posterior variance of the spline
// refitted with one more landmark at z (weight the mean, so its smoothing
// is S, and any target) equals the rank-one update
// σ²(x) − C(x, z)²/(σ²(z) + S) of the spline without it, to 1e-8.
func TestSplineCrossConditioningEqualsRefit(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 17))
	for _, tc := range []struct {
		name      string
		dim       int
		nodes     int
		smoothing float64
		weighted  bool
	}{
		{"3-D smoothed", 3, 30, 20, false},
		{"3-D interpolating", 3, 30, 0, false},
		{"3-D weighted", 3, 40, 8, true},
		{"3-D large", 3, 100, 4, false},
		{"2-D smoothed weighted", 2, 25, 900, true},
		{"2-D interpolating", 2, 25, 0, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			src, dst := covPairs(rng, tc.nodes, tc.dim, 1000)
			var w []float64
			if tc.weighted {
				w = covWeights(rng, len(src))
			}
			_, sp := covSpline(t, tc.dim, src, dst, tc.smoothing, w)
			xs := covPoints(rng, 50, tc.dim, 1000)
			for _, z := range covPoints(rng, 4, tc.dim, 1000) {
				src2 := append(append([]Vec(nil), src...), z)
				// Any target: the variance does not depend on it.
				dst2 := append(append([]Vec(nil), dst...), Vec{rng.Float64() * 1e4, -3e3, 17})
				if tc.dim == 2 {
					dst2[len(dst2)-1][2] = 0
				}
				var w2 []float64
				if w != nil {
					mean := 0.0
					for _, v := range w {
						mean += v
					}
					w2 = append(append([]float64(nil), w...), mean/float64(len(w)))
				}
				_, refit := covSpline(t, tc.dim, src2, dst2, tc.smoothing, w2)
				vz := sp.Factor(z)[0][0]
				cross := make([]float64, len(xs))
				sp.CrossAll(xs, []Vec{z}, cross)
				for i, x := range xs {
					want := refit.Factor(x)[0][0]
					got := sp.Factor(x)[0][0] - cross[i]*cross[i]/(vz+tc.smoothing)
					if math.Abs(got-want) > 1e-8*math.Abs(want)+1e-10*vz {
						t.Fatalf("after a landmark at %v: updated σ²(%v) = %.12g, refit %.12g", z, x, got, want)
					}
				}
			}
		})
	}
}

func TestNewCrossPredictorRefuses(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 2))
	src, dst := covPairs(rng, 12, 3, 0)
	res, err := Fit(TPS, 3, src, dst, Options{})
	if err != nil {
		t.Fatal(err)
	}
	lin, err := Fit(Affine, 3, src, dst, Options{})
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		t    Transform
		src  []Vec
		want string
	}{
		{"nil", nil, src, "no transform"},
		{"wrong landmark count", res.Transform, src[:5], "5 source points"},
		{"chain", &Chain{Steps: []Transform{res.Transform, lin.Transform}}, src, "chain"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := NewCrossPredictor(tc.t, tc.src, nil)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %v, want one containing %q", err, tc.want)
			}
		})
	}
}

// BenchmarkSplineCrossAll: the covariances between 2,000 cells and 5,000
// candidate locations under a 100-landmark spline, the set-up of suggest.
func BenchmarkSplineCrossAll(b *testing.B) {
	rng := rand.New(rand.NewPCG(8, 8))
	src, dst := covPairs(rng, 100, 3, 0)
	_, sp := covSpline(b, 3, src, dst, 5, nil)
	xs, zs := covPoints(rng, 2000, 3, 0), covPoints(rng, 5000, 3, 0)
	out := make([]float64, len(xs)*len(zs))
	for b.Loop() {
		sp.CrossAll(xs, zs, out)
	}
}

// Twelve landmarks fix a spline over a 300 µm cube. Where should the next
// one go to make the map surest at a cell? The posterior covariance answers
// before anyone looks for the landmark's target: one more landmark at z
// lowers the variance at the cell by C(cell, z)²/(σ²(z) + S), whatever its
// target turns out to be.
func ExampleNewCrossPredictor() {
	src := []Vec{
		{0, 0, 0}, {300, 0, 0}, {0, 300, 0}, {0, 0, 300}, {300, 300, 0}, {300, 0, 300},
		{0, 300, 300}, {300, 300, 300}, {150, 0, 150}, {0, 150, 150}, {150, 150, 0}, {300, 150, 150},
	}
	dst := make([]Vec, len(src))
	for i, p := range src {
		dst[i] = Vec{0.9*p[0] + 2e4, 0.9*p[1] + 3e4 + 5*math.Sin(p[0]/100), 0.8 * p[2]}
	}
	const smoothing = 5.0
	res, err := Fit(TPS, 3, src, dst, Options{Smoothing: smoothing})
	if err != nil {
		fmt.Println(err)
		return
	}
	cp, err := NewCrossPredictor(res.Transform, src, nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	cell := Vec{150, 250, 250}
	before := cp.Factor(cell)[0][0]
	// Factors are in units of the scale s (µm²) of the landmarks' noise.
	fmt.Printf("variance factor at the cell: %.1f\n", before)
	for _, z := range []Vec{{150, 240, 240}, {150, 150, 150}, {280, 20, 20}} {
		c := cp.CrossFactor(cell, z)[0][0]
		after := before - c*c/(cp.Factor(z)[0][0]+smoothing)
		fmt.Printf("after a landmark at (%3.0f, %3.0f, %3.0f) µm: %.1f\n", z[0], z[1], z[2], after)
	}
	// Output:
	// variance factor at the cell: 144.5
	// after a landmark at (150, 240, 240) µm: 30.0
	// after a landmark at (150, 150, 150) µm: 131.5
	// after a landmark at (280,  20,  20) µm: 144.5
}
