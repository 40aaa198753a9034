package transform

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"
)

// TestFitUmeyamaExample checks the worked example of Umeyama (1991, IEEE
// Trans. Pattern Anal. Mach. Intell. 13(4):376–380), which maps the points X
// onto Y by y ≈ c·R·x + t. The expected c, R and t are recalled from memory of
// the paper, to the four decimals it prints. Y is X mirrored through the y
// axis, so where mirrors are allowed the fit is that mirror exactly; with
// mirrors forbidden it is Umeyama's rotation-only answer.
func TestFitUmeyamaExample(t *testing.T) {
	x := []Vec{{0, 0}, {1, 0}, {0, 2}}
	y := []Vec{{0, 0}, {-1, 0}, {0, 2}}
	tests := []struct {
		name     string
		noMirror bool
		scale    float64
		a        Mat // c·R, with the 2-D z row and column
		offset   Vec
		mirrored bool
		exact    bool
	}{
		{name: "mirror allowed", scale: 1, a: Mat{{-1, 0, 0}, {0, 1, 0}, {0, 0, 1}}, mirrored: true, exact: true},
		{
			name: "no mirror (Umeyama's answer)", noMirror: true, scale: 0.7211,
			a:      Mat{{0.7211 * 0.8321, 0.7211 * 0.5547, 0}, {0.7211 * -0.5547, 0.7211 * 0.8321, 0}, {0, 0, 1}},
			offset: Vec{-0.8, 0.4},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			res, err := Fit(Similarity, 2, x, y, Options{NoMirror: tt.noMirror})
			if err != nil {
				t.Fatal(err)
			}
			l := res.Transform.(*Linear)
			if math.Abs(l.Scale-tt.scale) > 5e-5 {
				t.Errorf("scale %.6f, want %.4f", l.Scale, tt.scale)
			}
			r := scaled(l.A, 1/l.Scale, 2)
			wantR := scaled(tt.a, 1/tt.scale, 2)
			if d := maxAbsDiff(r, wantR); d > 5e-5 {
				t.Errorf("rotation %v, want %v", r, wantR)
			}
			if d := l.T.Sub(tt.offset).Norm(); d > 5e-5 {
				t.Errorf("offset %v, want %v", l.T, tt.offset)
			}
			if res.Mirrored != tt.mirrored || l.Mirrored != tt.mirrored {
				t.Errorf("mirrored %t (transform %t), want %t", res.Mirrored, l.Mirrored, tt.mirrored)
			}
			for i, r := range res.Residuals {
				want := y[i].Sub(l.Apply(x[i]))
				if d := r.Sub(want).Norm(); d > 1e-12 {
					t.Errorf("residual %d is %v, but target − Apply(source) is %v", i, r, want)
				}
				if tt.exact && r.Norm() > 1e-12 {
					t.Errorf("residual %d is %v, want 0", i, r)
				}
			}
		})
	}
}

// randomRotation returns a uniformly random rotation (Shoemake's unit
// quaternion in 3-D, an angle in 2-D), composed with a reflection of the
// last axis when mirror is set.
func randomRotation(rng *rand.Rand, dim int, mirror bool) Mat {
	var r Mat
	if dim == 2 {
		a := 2 * math.Pi * rng.Float64()
		r = Mat{{math.Cos(a), -math.Sin(a), 0}, {math.Sin(a), math.Cos(a), 0}, {0, 0, 1}}
	} else {
		q := [4]float64{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
		n := math.Sqrt(q[0]*q[0] + q[1]*q[1] + q[2]*q[2] + q[3]*q[3])
		w, x, y, z := q[0]/n, q[1]/n, q[2]/n, q[3]/n
		r = Mat{
			{1 - 2*(y*y+z*z), 2 * (x*y - w*z), 2 * (x*z + w*y)},
			{2 * (x*y + w*z), 1 - 2*(x*x+z*z), 2 * (y*z - w*x)},
			{2 * (x*z - w*y), 2 * (y*z + w*x), 1 - 2*(x*x+y*y)},
		}
	}
	if mirror {
		for i := range dim {
			r[i][dim-1] = -r[i][dim-1]
		}
	}
	return r
}

// randomMap returns an exactly known map of the given kind.
func randomMap(rng *rand.Rand, kind Kind, dim int, mirror bool, offset float64) *Linear {
	l := &Linear{Model: kind, D: dim, A: Identity(), Scale: 1}
	switch kind {
	case Rigid:
		l.A = randomRotation(rng, dim, mirror)
	case Similarity:
		l.Scale = 0.5 + rng.Float64()
		l.A = scaled(randomRotation(rng, dim, mirror), l.Scale, dim)
	case Affine:
		l.Scale = 0
		for {
			for i := range dim {
				for j := range dim {
					l.A[i][j] = rng.NormFloat64()
					if i == j {
						l.A[i][j] += 2
					}
				}
			}
			if (l.A.Det() < 0) == mirror && math.Abs(l.A.Det()) > 0.5 {
				break
			}
		}
	}
	l.Mirrored = l.A.Det() < 0
	for i := range dim {
		l.T[i] = offset + 1000*rng.NormFloat64()
	}
	return l
}

// randomPoints returns n points spread over about ±spread µm around a
// centre whose coordinates are all offset.
func randomPoints(rng *rand.Rand, n, dim int, offset, spread float64) []Vec {
	p := make([]Vec, n)
	for i := range p {
		for k := range dim {
			p[i][k] = offset + spread*(2*rng.Float64()-1)
		}
	}
	return p
}

func applyAll(t Transform, src []Vec) []Vec {
	dst := make([]Vec, len(src))
	for i := range src {
		dst[i] = t.Apply(src[i])
	}
	return dst
}

func addNoise(rng *rand.Rand, v []Vec, dim int, sd float64) []Vec {
	out := make([]Vec, len(v))
	for i := range v {
		out[i] = v[i]
		for k := range dim {
			out[i][k] += sd * rng.NormFloat64()
		}
	}
	return out
}

type linearCase struct {
	kind   Kind
	dim    int
	mirror bool
	offset float64
}

func (c linearCase) String() string {
	m := ""
	if c.mirror {
		m = " mirrored"
	}
	return fmt.Sprintf("%s %d-D%s at %g µm", c.kind, c.dim, m, c.offset)
}

func linearCases() []linearCase {
	var cases []linearCase
	for _, kind := range []Kind{Translation, Rigid, Similarity, Affine} {
		for _, dim := range []int{2, 3} {
			for _, mirror := range []bool{false, true} {
				if mirror && kind == Translation {
					continue
				}
				for _, offset := range []float64{0, 1e5} {
					cases = append(cases, linearCase{kind, dim, mirror, offset})
				}
			}
		}
	}
	return cases
}

// TestFitLinearReproducesExactMap: every model recovers a map of its own
// kind exactly, and the affine model recovers every map, from noiseless
// pairs, in 2-D and 3-D, near the origin and near 1e5 µm.
func TestFitLinearReproducesExactMap(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, c := range linearCases() {
		for _, fitKind := range []Kind{c.kind, Affine} {
			t.Run(fmt.Sprintf("%s fitted %s", c, fitKind), func(t *testing.T) {
				truth := randomMap(rng, c.kind, c.dim, c.mirror, c.offset)
				src := randomPoints(rng, 12, c.dim, c.offset, 500)
				dst := applyAll(truth, src)
				res, err := Fit(fitKind, c.dim, src, dst, Options{LeaveOneOut: true})
				if err != nil {
					t.Fatal(err)
				}
				l := res.Transform.(*Linear)
				size := c.offset + 2000 // µm: the coordinates' magnitude
				if d := maxAbsDiff(l.A, truth.A); d > 1e-11 {
					t.Errorf("matrix %v, want %v", l.A, truth.A)
				}
				if d := l.T.Sub(truth.T).Norm(); d > 1e-12*size {
					t.Errorf("offset %v, want %v (off by %g µm)", l.T, truth.T, d)
				}
				if res.Mirrored != truth.Mirrored || l.Mirrored != truth.Mirrored {
					t.Errorf("mirrored %t (transform %t), want %t", res.Mirrored, l.Mirrored, truth.Mirrored)
				}
				if fitKind == c.kind && l.Scale != 0 && math.Abs(l.Scale-truth.Scale) > 1e-12 {
					t.Errorf("scale %v, want %v", l.Scale, truth.Scale)
				}
				for i := range src {
					if d := res.Residuals[i].Norm(); d > 1e-13*size {
						t.Errorf("pair %d: residual %g µm, want 0", i, d)
					}
					if d := res.LOO[i].Norm(); d > 1e-13*size {
						t.Errorf("pair %d: leave-one-out error %g µm, want 0", i, d)
					}
				}
				if err := l.validate(); err != nil {
					t.Errorf("fitted transform does not validate: %v", err)
				}
			})
		}
	}
}

// TestFitLinearExtraPairOnMap: a pair that lies exactly on the fitted map
// leaves a least-squares fit where it was (its term is zero there and
// non-negative elsewhere).
func TestFitLinearExtraPairOnMap(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, c := range linearCases() {
		t.Run(c.String(), func(t *testing.T) {
			truth := randomMap(rng, c.kind, c.dim, c.mirror, c.offset)
			src := randomPoints(rng, 10, c.dim, c.offset, 300)
			dst := addNoise(rng, applyAll(truth, src), c.dim, 2)
			first, err := Fit(c.kind, c.dim, src, dst, Options{})
			if err != nil {
				t.Fatal(err)
			}
			extra := randomPoints(rng, 1, c.dim, c.offset, 300)[0]
			src2 := append(append([]Vec(nil), src...), extra)
			dst2 := append(append([]Vec(nil), dst...), first.Transform.Apply(extra))
			second, err := Fit(c.kind, c.dim, src2, dst2, Options{})
			if err != nil {
				t.Fatal(err)
			}
			a, b := first.Transform.(*Linear), second.Transform.(*Linear)
			size := c.offset + 2000
			if d := maxAbsDiff(a.A, b.A); d > 1e-11 {
				t.Errorf("matrix moved by %g", d)
			}
			if d := a.T.Sub(b.T).Norm(); d > 1e-11*size {
				t.Errorf("offset moved by %g µm", d)
			}
		})
	}
}

// TestFitLinearWeights: only the ratios of the weights matter, and a
// perturbed pair of tiny weight barely moves a fit to otherwise exact pairs.
func TestFitLinearWeights(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for _, c := range linearCases() {
		t.Run(c.String(), func(t *testing.T) {
			truth := randomMap(rng, c.kind, c.dim, c.mirror, c.offset)
			n := 15
			src := randomPoints(rng, n, c.dim, c.offset, 300)
			dst := addNoise(rng, applyAll(truth, src), c.dim, 2)
			w := make([]float64, n)
			w2 := make([]float64, n)
			for i := range w {
				w[i] = 0.1 + rng.Float64()
				w2[i] = 2 * w[i]
			}
			a, err := Fit(c.kind, c.dim, src, dst, Options{Weights: w, LeaveOneOut: true})
			if err != nil {
				t.Fatal(err)
			}
			b, err := Fit(c.kind, c.dim, src, dst, Options{Weights: w2, LeaveOneOut: true})
			if err != nil {
				t.Fatal(err)
			}
			la, lb := a.Transform.(*Linear), b.Transform.(*Linear)
			size := c.offset + 2000
			if d := maxAbsDiff(la.A, lb.A); d > 1e-12 {
				t.Errorf("doubling the weights moved the matrix by %g", d)
			}
			if d := la.T.Sub(lb.T).Norm(); d > 1e-12*size {
				t.Errorf("doubling the weights moved the offset by %g µm", d)
			}
			for i := range a.LOO {
				if d := a.LOO[i].Sub(b.LOO[i]).Norm(); d > 1e-12*size {
					t.Errorf("doubling the weights moved leave-one-out error %d by %g µm", i, d)
				}
			}

			// Exact pairs, one of them moved 50 µm but given a weight of 1e-9.
			exact := applyAll(truth, src)
			exact[4] = exact[4].Add(Vec{50, -50, 0})
			tiny := make([]float64, n)
			for i := range tiny {
				tiny[i] = 1
			}
			tiny[4] = 1e-9
			res, err := Fit(c.kind, c.dim, src, exact, Options{Weights: tiny})
			if err != nil {
				t.Fatal(err)
			}
			l := res.Transform.(*Linear)
			for i, p := range src {
				if d := l.Apply(p).Sub(truth.Apply(p)).Norm(); d > 1e-6 {
					t.Errorf("pair %d moved %g µm by a perturbed pair of weight 1e-9", i, d)
				}
			}
		})
	}
}

// TestFitLinearLOOMatchesRefits compares Result.LOO with fits to all the
// pairs but one, done one by one.
func TestFitLinearLOOMatchesRefits(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	for _, c := range linearCases() {
		for _, weighted := range []bool{false, true} {
			t.Run(fmt.Sprintf("%s weighted %t", c, weighted), func(t *testing.T) {
				truth := randomMap(rng, c.kind, c.dim, c.mirror, c.offset)
				n := 9
				src := randomPoints(rng, n, c.dim, c.offset, 300)
				dst := addNoise(rng, applyAll(truth, src), c.dim, 3)
				var w []float64
				if weighted {
					w = make([]float64, n)
					for i := range w {
						w[i] = 0.05 + 3*rng.Float64()
					}
				}
				res, err := Fit(c.kind, c.dim, src, dst, Options{Weights: w, LeaveOneOut: true})
				if err != nil {
					t.Fatal(err)
				}
				for i := range n {
					var s, d []Vec
					var wi []float64
					for j := range n {
						if j == i {
							continue
						}
						s, d = append(s, src[j]), append(d, dst[j])
						if w != nil {
							wi = append(wi, w[j])
						}
					}
					refit, err := Fit(c.kind, c.dim, s, d, Options{Weights: wi})
					if err != nil {
						t.Fatal(err)
					}
					if refit.Mirrored != res.Mirrored {
						t.Fatalf("refit without pair %d changed handedness: the test data should not allow that", i)
					}
					want := dst[i].Sub(refit.Transform.Apply(src[i]))
					if diff := res.LOO[i].Sub(want).Norm(); diff > 1e-9*want.Norm() {
						t.Errorf("pair %d: leave-one-out error %v, refit gives %v (relative difference %.2g)", i, res.LOO[i], want, diff/want.Norm())
					}
				}
			})
		}
	}
}

// TestFitLOOParallel: enough pairs for the rigid and similarity refits to
// run on several goroutines give the same answers as refits one by one, and
// a failing refit reports its pair.
func TestFitLOOParallel(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	const n = 120
	for _, kind := range []Kind{Rigid, Similarity} {
		truth := randomMap(rng, kind, 3, true, 1e5)
		src := randomPoints(rng, n, 3, 1e5, 400)
		dst := addNoise(rng, applyAll(truth, src), 3, 2)
		res, err := Fit(kind, 3, src, dst, Options{LeaveOneOut: true})
		if err != nil {
			t.Fatal(err)
		}
		for i := range n {
			s := append(append([]Vec(nil), src[:i]...), src[i+1:]...)
			d := append(append([]Vec(nil), dst[:i]...), dst[i+1:]...)
			refit, err := Fit(kind, 3, s, d, Options{})
			if err != nil {
				t.Fatal(err)
			}
			want := dst[i].Sub(refit.Transform.Apply(src[i]))
			if diff := res.LOO[i].Sub(want).Norm(); diff > 1e-9*want.Norm() {
				t.Errorf("%s pair %d: leave-one-out error %v, refit gives %v", kind, i, res.LOO[i], want)
			}
		}
	}
	// One pair off the line of all the others: the refit without it
	// leaves the rotation about the line free, and the error, raised on a
	// worker goroutine, must name that pair.
	src := make([]Vec, n)
	for i := range src {
		src[i] = Vec{1e5 + 3*float64(i), 1e5 + 2*float64(i), 1e5 - float64(i)}
	}
	src[70] = src[70].Add(Vec{0, 50, 0})
	dst := applyAll(randomMap(rng, Rigid, 3, false, 0), src)
	if _, err := Fit(Rigid, 3, src, dst, Options{LeaveOneOut: true}); err == nil || !strings.Contains(err.Error(), "without pair 70") {
		t.Errorf("got error %v, want one naming pair 70", err)
	}
}

// TestFitLOOKeepsHandedness: an EM block imaged from its far face gives
// mirrored pairs. Leaving out the one landmark off the plane of the others
// leaves a mirror and a rotation fitting equally well; the refit must keep
// the mirror of the full fit and predict that landmark exactly.
func TestFitLOOKeepsHandedness(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 10))
	for _, kind := range []Kind{Rigid, Similarity} {
		t.Run(string(kind), func(t *testing.T) {
			truth := randomMap(rng, kind, 3, true, 1e5)
			src := []Vec{{1e5, 1e5, 1e5}, {1e5 + 200, 1e5, 1e5}, {1e5, 1e5 + 200, 1e5}, {1e5 + 150, 1e5 + 150, 1e5}, {1e5 + 50, 1e5 + 80, 1e5 + 120}}
			dst := applyAll(truth, src)
			res, err := Fit(kind, 3, src, dst, Options{LeaveOneOut: true})
			if err != nil {
				t.Fatal(err)
			}
			if !res.Mirrored {
				t.Fatal("mirrored pairs fitted without a mirror")
			}
			for i, e := range res.LOO {
				if e.Norm() > 1e-6 {
					t.Errorf("pair %d: leave-one-out error %g µm, want 0", i, e.Norm())
				}
			}
			// The free refit of the coplanar four, by contrast, takes the
			// proper rotation, which puts the fifth landmark on the wrong side.
			free, err := Fit(kind, 3, src[:4], dst[:4], Options{})
			if err != nil {
				t.Fatal(err)
			}
			if free.Mirrored {
				t.Error("coplanar pairs took a mirror that nothing calls for")
			}
			if d := dst[4].Sub(free.Transform.Apply(src[4])).Norm(); d < 100 {
				t.Errorf("free refit predicts the off-plane landmark within %g µm: the test does not exercise the handedness", d)
			}
		})
	}
}

// TestFitNoMirror: with mirrors forbidden, mirrored pairs get the best
// proper rotation (Umeyama 1991), never a determinant of −1.
func TestFitNoMirror(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for _, kind := range []Kind{Rigid, Similarity} {
		for _, dim := range []int{2, 3} {
			t.Run(fmt.Sprintf("%s %d-D", kind, dim), func(t *testing.T) {
				truth := randomMap(rng, kind, dim, true, 1e5)
				src := randomPoints(rng, 10, dim, 1e5, 300)
				dst := applyAll(truth, src)
				res, err := Fit(kind, dim, src, dst, Options{NoMirror: true, LeaveOneOut: true})
				if err != nil {
					t.Fatal(err)
				}
				l := res.Transform.(*Linear)
				if res.Mirrored || l.Mirrored || l.A.Det() <= 0 {
					t.Errorf("no-mirror fit has det %g, mirrored %t", l.A.Det(), res.Mirrored)
				}
				if err := l.validate(); err != nil {
					t.Error(err)
				}
				rms := 0.0
				for _, r := range res.Residuals {
					rms += r.Dot(r)
				}
				if math.Sqrt(rms/10) < 10 {
					t.Errorf("a rotation fits mirrored pairs to %g µm RMS", math.Sqrt(rms/10))
				}
				// No other rotation, with its best offset, beats it.
				best := rigidCost(l, src, dst)
				for range 200 {
					r := randomRotation(rng, dim, false).Mul(scaled(l.A, 1/l.Scale, dim))
					trial := &Linear{D: dim, A: scaled(r, l.Scale, dim)}
					if cost := rigidCostBestOffset(trial, src, dst); cost < best*(1-1e-12) {
						t.Fatalf("a perturbed rotation fits better: %g against %g µm²", cost, best)
					}
				}
			})
		}
	}
}

func rigidCost(l *Linear, src, dst []Vec) float64 {
	c := 0.0
	for i := range src {
		r := dst[i].Sub(l.Apply(src[i]))
		c += r.Dot(r)
	}
	return c
}

// rigidCostBestOffset is the squared error of l's matrix with its best
// offset, the difference of the centroids.
func rigidCostBestOffset(l *Linear, src, dst []Vec) float64 {
	var d Vec
	for i := range src {
		d = d.Add(dst[i].Sub(l.A.MulVec(src[i])))
	}
	l.T = d.Scale(1 / float64(len(src)))
	return rigidCost(l, src, dst)
}

// TestLinearInvertAndJacobian: Invert undoes Apply; the Jacobian matches
// central differences.
func TestLinearInvertAndJacobian(t *testing.T) {
	rng := rand.New(rand.NewPCG(13, 14))
	for _, c := range linearCases() {
		t.Run(c.String(), func(t *testing.T) {
			truth := randomMap(rng, c.kind, c.dim, c.mirror, c.offset)
			src := randomPoints(rng, 8, c.dim, c.offset, 300)
			res, err := Fit(c.kind, c.dim, src, addNoise(rng, applyAll(truth, src), c.dim, 1), Options{})
			if err != nil {
				t.Fatal(err)
			}
			l := res.Transform
			size := c.offset + 2000
			for _, p := range randomPoints(rng, 5, c.dim, c.offset, 1000) {
				back, err := l.Invert(l.Apply(p))
				if err != nil {
					t.Fatal(err)
				}
				if d := back.Sub(p).Norm(); d > 1e-12*size {
					t.Errorf("Invert(Apply(%v)) = %v", p, back)
				}
				if c.dim == 2 && (l.Apply(p)[2] != 0 || back[2] != 0) {
					t.Errorf("2-D map moved z: %v, %v", l.Apply(p), back)
				}
				j := l.Jacobian(p)
				const h = 1.0 // µm; the map is linear, so any step is exact
				for k := range 3 {
					var e Vec
					e[k] = h
					col := l.Apply(p.Add(e)).Sub(l.Apply(p.Sub(e))).Scale(1 / (2 * h))
					for i := range 3 {
						if math.Abs(col[i]-j[i][k]) > 1e-9*size {
							t.Errorf("Jacobian[%d][%d] = %g, difference quotient %g", i, k, j[i][k], col[i])
						}
					}
				}
			}
		})
	}
	singular := &Linear{Model: Affine, D: 3, A: Mat{{1, 2, 3}, {2, 4, 6}, {0, 0, 1}}}
	if _, err := singular.Invert(Vec{1, 2, 3}); err == nil {
		t.Error("inverting a singular affine map gave no error")
	}
}

// TestFitLinearDegenerate: pairs that do not determine the model give
// errors that say why, never panics.
func TestFitLinearDegenerate(t *testing.T) {
	const big = 1e5 // µm
	line := func(n int, off, across float64) []Vec {
		p := make([]Vec, n)
		for i := range p {
			s := float64(i) * 40
			p[i] = Vec{off + s, off + 0.5*s, off - 0.25*s}
			p[i][1] += across * float64(i%2)
			p[i][2] += across * float64((i/2)%2)
		}
		return p
	}
	plane := func(n int, off, across float64) []Vec {
		p := make([]Vec, n)
		for i := range p {
			u, v := float64(i%3)*60, float64(i/3)*45
			p[i] = Vec{off + u, off + v, off + 0.3*u - 0.2*v + across*float64(i%2)}
		}
		return p
	}
	flat2 := func(p []Vec) []Vec {
		q := make([]Vec, len(p))
		for i := range p {
			q[i] = Vec{p[i][0], p[i][1]}
		}
		return q
	}
	same := func(n int, at Vec) []Vec {
		p := make([]Vec, n)
		for i := range p {
			p[i] = at
		}
		return p
	}
	rng := rand.New(rand.NewPCG(15, 16))
	spread3 := randomPoints(rng, 6, 3, big, 300)
	spread2 := randomPoints(rng, 6, 2, big, 300)
	// Four pairs on a plane and one off it: only that one fixes the
	// affine map off the plane.
	lever := append(plane(5, big, 0), Vec{big + 10, big + 20, big + 80})
	// Three pairs on a line and one off it: without the fourth, no
	// rotation about the line is fixed.
	lineAndOne := append(line(3, big, 0), Vec{big, big + 90, big})
	tests := []struct {
		name     string
		kind     Kind
		dim      int
		src, dst []Vec
		loo      bool
		want     string
	}{
		{"rigid 3-D sources coincide", Rigid, 3, same(5, Vec{big, big, big}), spread3[:5], false, "source points coincide"},
		{"rigid 3-D sources nearly coincide", Rigid, 3, addNoise(rng, same(5, Vec{big, big, big}), 3, 1e-9), spread3[:5], false, "source points coincide"},
		{"similarity 2-D sources coincide", Similarity, 2, same(4, Vec{3, 4}), spread2[:4], false, "source points coincide"},
		{"affine 3-D sources coincide", Affine, 3, same(5, Vec{big, 0, big}), spread3[:5], false, "source points coincide"},
		{"rigid 3-D targets coincide", Rigid, 3, spread3[:5], same(5, Vec{1, 2, 3}), false, "target points coincide"},
		{"similarity 2-D targets coincide", Similarity, 2, spread2[:4], same(4, Vec{big, big}), false, "target points coincide"},
		{"rigid 3-D sources on a line", Rigid, 3, line(6, big, 0), spread3, false, "source points lie on a line"},
		{"similarity 3-D sources nearly on a line", Similarity, 3, line(6, big, 1e-5), spread3, false, "source points lie on a line"},
		{"similarity 3-D targets on a line", Similarity, 3, spread3, line(6, 0, 0), false, "target points lie on a line"},
		{"affine 2-D sources on a line", Affine, 2, flat2(line(5, big, 0)), spread2[:5], false, "source points lie on a line"},
		{"affine 3-D sources on a plane", Affine, 3, plane(6, big, 0), spread3, false, "source points lie on a plane"},
		{"affine 3-D sources nearly on a plane", Affine, 3, plane(6, big, 1e-5), spread3, false, "source points lie on a plane"},
		{"affine 3-D sources on a line", Affine, 3, line(6, big, 0), spread3, false, "source points lie on a plane"},
		{"affine leave-one-out of a lever pair", Affine, 3, lever, spread3, true, "pair 5"},
		{"rigid leave-one-out leaving a line", Rigid, 3, lineAndOne, spread3[:4], true, "without pair 3"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			res, err := Fit(tt.kind, tt.dim, tt.src, tt.dst, Options{LeaveOneOut: tt.loo})
			if err == nil {
				t.Fatalf("no error; fitted %+v", res.Transform)
			}
			if !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %q does not say %q", err, tt.want)
			}
		})
	}
	// Spread pairs in a thin but real slab still fit: the tolerance is
	// relative, not a hard floor.
	if _, err := Fit(Affine, 3, plane(6, big, 0.05), spread3, Options{LeaveOneOut: true}); err != nil {
		t.Errorf("landmarks in a 0.05 µm slab 200 µm wide: %v", err)
	}
}

// TestLinearValidate: fitted transforms survive a JSON round trip and
// validate; damaged ones are refused.
func TestLinearValidate(t *testing.T) {
	rng := rand.New(rand.NewPCG(17, 18))
	for _, c := range linearCases() {
		truth := randomMap(rng, c.kind, c.dim, c.mirror, c.offset)
		src := randomPoints(rng, 8, c.dim, c.offset, 300)
		res, err := Fit(c.kind, c.dim, src, addNoise(rng, applyAll(truth, src), c.dim, 1), Options{})
		if err != nil {
			t.Fatal(err)
		}
		data, err := json.Marshal(res.Transform)
		if err != nil {
			t.Fatal(err)
		}
		var back Linear
		if err := json.Unmarshal(data, &back); err != nil {
			t.Fatal(err)
		}
		if diff := cmp.Diff(res.Transform.(*Linear), &back); diff != "" {
			t.Errorf("%s: JSON round trip changed the transform (-fitted +decoded):\n%s", c, diff)
		}
		if err := back.validate(); err != nil {
			t.Errorf("%s: %v", c, err)
		}
	}

	rot := randomRotation(rng, 3, false)
	good := func(kind Kind) Linear {
		l := Linear{Model: kind, D: 3, A: rot, T: Vec{1, 2, 3}, Scale: 1}
		switch kind {
		case Translation:
			l.A = Identity()
		case Similarity:
			l.Scale = 2
			l.A = scaled(rot, 2, 3)
		case Affine:
			l.Scale = 0
			l.A = Mat{{1, 0.2, 0}, {0, 3, 0}, {0.1, 0, 1}}
		}
		return l
	}
	nan := math.NaN()
	tests := []struct {
		name   string
		base   Kind
		change func(*Linear)
		want   string
	}{
		{"unknown model", Rigid, func(l *Linear) { l.Model = "warp" }, "model"},
		{"dimension 4", Rigid, func(l *Linear) { l.D = 4 }, "dimension 4"},
		{"NaN in matrix", Affine, func(l *Linear) { l.A[1][2] = nan }, "matrix entry (1,2)"},
		{"infinite offset", Translation, func(l *Linear) { l.T[0] = math.Inf(1) }, "offset"},
		{"NaN scale", Similarity, func(l *Linear) { l.Scale = nan }, "scale"},
		{"2-D with z offset", Translation, func(l *Linear) { l.D = 2; l.T[2] = 1 }, "leave z alone"},
		{"2-D with z coupling", Affine, func(l *Linear) { l.D = 2; l.T[2] = 0 }, "leave z alone"},
		{"singular", Affine, func(l *Linear) { l.A = Mat{{1, 2, 0}, {2, 4, 0}, {0, 0, 1}} }, "singular"},
		{"mirror flag wrong", Rigid, func(l *Linear) { l.Mirrored = true }, "mirrored"},
		{"mirror flag missing", Affine, func(l *Linear) { l.A[0][0] = -1; l.A[0][1] = 0 }, "mirrored"},
		{"translation matrix", Translation, func(l *Linear) { l.A[0][1] = 1e-3 }, "identity"},
		{"rigid stretched", Rigid, func(l *Linear) { l.A = scaled(l.A, 1.001, 3) }, "not orthogonal"},
		{"rigid scale", Rigid, func(l *Linear) { l.Scale = 2 }, "scale 2"},
		{"similarity scale mismatched", Similarity, func(l *Linear) { l.Scale = 2.01 }, "orthogonal"},
		{"similarity scale missing", Similarity, func(l *Linear) { l.Scale = 0 }, "scale 0"},
		{"similarity sheared", Similarity, func(l *Linear) { l.A[0][1] += 1e-3 }, "orthogonal"},
		{"affine with scale", Affine, func(l *Linear) { l.Scale = 3 }, "no single scale"},
	}
	for _, base := range []Kind{Translation, Rigid, Similarity, Affine} {
		l := good(base)
		if err := l.validate(); err != nil {
			t.Errorf("valid %s refused: %v", base, err)
		}
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			l := good(tt.base)
			tt.change(&l)
			err := l.validate()
			if err == nil {
				t.Fatalf("damaged transform %+v accepted", l)
			}
			if !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %q does not say %q", err, tt.want)
			}
		})
	}
	var missing *Linear
	if err := missing.validate(); err == nil {
		t.Error("nil transform accepted")
	}
}

func BenchmarkLinearLOO(b *testing.B) {
	rng := rand.New(rand.NewPCG(19, 20))
	truth := randomMap(rng, Rigid, 3, false, 1e5)
	src := randomPoints(rng, 1000, 3, 1e5, 500)
	dst := addNoise(rng, applyAll(truth, src), 3, 1)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Fit(Rigid, 3, src, dst, Options{LeaveOneOut: true}); err != nil {
			b.Fatal(err)
		}
	}
}
