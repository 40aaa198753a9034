package transform

import (
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"sync"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// The tests here check the first-order (Gauss–Newton) uncertainty of the
// linear fits, the target registration error analysis of Fitzpatrick, West
// and Maurer (1998, IEEE Trans. Med. Imaging 17(5):694–702): by Monte Carlo
// against the fits themselves, against that paper's closed form for a rigid
// motion, and against brute-force hat matrices built from an independent
// parameterisation.

// noisyTargets returns truth(src) with Gaussian errors of standard deviation
// sd[k]/√w_i on axis k of pair i.
func noisyTargets(rng *rand.Rand, truth Transform, src []Vec, sd Vec, w []float64, dim int) []Vec {
	dst := make([]Vec, len(src))
	for i, p := range src {
		dst[i] = truth.Apply(p)
		for k := range dim {
			dst[i][k] += sd[k] / math.Sqrt(w[i]) * rng.NormFloat64()
		}
	}
	return dst
}

// testWeights returns n weights spread over a factor of 9, not of mean 1, so
// that the tests see the normalisation.
func testWeights(rng *rand.Rand, n int) []float64 {
	w := make([]float64, n)
	for i := range w {
		w[i] = 0.3 + 2.4*rng.Float64()
	}
	return w
}

func diagScaled(f Mat, s Vec, dim int) Mat {
	var c Mat
	for i := range dim {
		for j := range dim {
			c[i][j] = math.Sqrt(s[i]*s[j]) * f[i][j]
		}
	}
	return c
}

func diagonal(v Vec, dim int) Mat {
	var m Mat
	for k := range dim {
		m[k][k] = v[k]
	}
	return m
}

// TestLinearPredictorMonteCarlo fits each model to many noisy copies of the
// same landmarks and compares the scatter of the fitted prediction about the
// true map, at points inside and far outside the landmark cloud, with the
// predicted covariance (Fitzpatrick, West and Maurer 1998, IEEE Trans. Med.
// Imaging 17(5):694–702, first-order analysis). The scaled Factor form
// diag(√s)·F·diag(√s) is exact for translation and affine fits and for
// isotropic noise; for a rotation with anisotropic noise the exact
// first-order covariance is Covariance(diag(s)), and the test logs how far
// the Factor form is from the scatter there.
func TestLinearPredictorMonteCarlo(t *testing.T) {
	const draws = 20000
	tests := []struct {
		name     string
		kind     Kind
		dim      int
		n        int
		sd       Vec // µm per axis, for a landmark of weight 1
		weighted bool
	}{
		{name: "rigid 3-D isotropic", kind: Rigid, dim: 3, n: 12, sd: Vec{1, 1, 1}},
		{name: "rigid 3-D z 4× worse", kind: Rigid, dim: 3, n: 12, sd: Vec{1, 1, 4}},
		{name: "rigid 3-D isotropic weighted", kind: Rigid, dim: 3, n: 8, sd: Vec{1.5, 1.5, 1.5}, weighted: true},
		{name: "similarity 3-D isotropic weighted", kind: Similarity, dim: 3, n: 10, sd: Vec{1, 1, 1}, weighted: true},
		{name: "similarity 3-D z 4× worse", kind: Similarity, dim: 3, n: 10, sd: Vec{1, 1, 4}},
		{name: "affine 3-D isotropic", kind: Affine, dim: 3, n: 12, sd: Vec{1, 1, 1}},
		{name: "affine 3-D z 4× worse weighted", kind: Affine, dim: 3, n: 12, sd: Vec{1, 1, 4}, weighted: true},
		{name: "translation 3-D z 4× worse weighted", kind: Translation, dim: 3, n: 6, sd: Vec{1, 1, 4}, weighted: true},
		{name: "rigid 2-D isotropic", kind: Rigid, dim: 2, n: 6, sd: Vec{2, 2}},
		{name: "rigid 2-D y 3× worse", kind: Rigid, dim: 2, n: 6, sd: Vec{1, 3}},
		{name: "affine 2-D y 3× worse", kind: Affine, dim: 2, n: 8, sd: Vec{1, 3}},
	}
	rng := rand.New(rand.NewPCG(31, 32))
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			truth := randomMap(rng, tt.kind, tt.dim, false, 2e4)
			src := randomPoints(rng, tt.n, tt.dim, 1e4, 200)
			var weights []float64
			if tt.weighted {
				weights = testWeights(rng, tt.n)
			}
			w := unitMeanWeights(weights, tt.n)
			c := centroid(src, unitShare(w))
			points := []Vec{c, src[0], c.Add(Vec{60, -40, 30}), c.Add(Vec{2000, 0, 0}), c.Add(Vec{0, 0, 2000}), c.Add(Vec{1500, -1500, 1000})}
			var s Vec
			for k := range tt.dim {
				s[k] = tt.sd[k] * tt.sd[k]
			}
			for i := range points {
				if tt.dim == 2 {
					points[i][2] = 0
				}
			}
			isotropic := true
			for k := range tt.dim {
				isotropic = isotropic && s[k] == s[0]
			}
			factorExact := isotropic || tt.kind == Affine || tt.kind == Translation

			sums := make([]Mat, len(points))
			var pred *LinearPredictor
			for d := range draws {
				dst := noisyTargets(rng, truth, src, tt.sd, w, tt.dim)
				res, err := Fit(tt.kind, tt.dim, src, dst, Options{Weights: weights})
				if err != nil {
					t.Fatal(err)
				}
				if d == 0 {
					pr, err := NewPredictor(res.Transform, src, weights)
					if err != nil {
						t.Fatal(err)
					}
					pred = pr.(*LinearPredictor)
				}
				for j, p := range points {
					e := res.Transform.Apply(p).Sub(truth.Apply(p))
					for a := range tt.dim {
						for b := range tt.dim {
							sums[j][a][b] += e[a] * e[b]
						}
					}
				}
			}
			exact, err := pred.Covariance(diagonal(s, tt.dim))
			if err != nil {
				t.Fatal(err)
			}
			for j, p := range points {
				var got Mat
				for a := range tt.dim {
					for b := range tt.dim {
						got[a][b] = sums[j][a][b] / draws
					}
				}
				factorForm := diagScaled(pred.Factor(p), s, tt.dim)
				want := exact.At(p)
				if factorExact {
					if d := maxAbsDiff(want, factorForm); d > 1e-9*trace(want) {
						t.Errorf("point %d: Covariance %v differs from the Factor form %v", j, want, factorForm)
					}
				} else {
					t.Logf("point %d: trace of diag(√s)·F·diag(√s) is %.3f of the Monte Carlo trace", j, trace(factorForm)/trace(got))
				}
				if r := trace(got)/trace(want) - 1; math.Abs(r) > 0.05 {
					t.Errorf("point %d at %.0f µm from the centroid: Monte Carlo trace %.4g µm², predicted %.4g µm² (%+.1f %%)", j, p.Sub(c).Norm(), trace(got), trace(want), 100*r)
				}
				// The sample covariance of Gaussian errors has entry
				// variance (C_aa C_bb + C_ab²)/draws.
				for a := range tt.dim {
					for b := range tt.dim {
						se := math.Sqrt((want[a][a]*want[b][b] + want[a][b]*want[a][b]) / draws)
						if math.Abs(got[a][b]-want[a][b]) > 5*se {
							t.Errorf("point %d entry (%d,%d): Monte Carlo %.4g µm², predicted %.4g ± %.2g µm²", j, a, b, got[a][b], want[a][b], se)
						}
					}
				}
			}
		})
	}
}

// unitShare turns weights of mean 1 into weights summing to 1.
func unitShare(w []float64) []float64 {
	out := make([]float64, len(w))
	for i, v := range w {
		out[i] = v / float64(len(w))
	}
	return out
}

// fitzpatrickTRE2 is the expected squared target registration error of a
// rigid fit at r, ⟨TRE²(r)⟩ ≈ (FLE²/N)(1 + (1/3)Σ_k d_k²/f_k²), of
// Fitzpatrick, West and Maurer (1998, IEEE Trans. Med. Imaging
// 17(5):694–702, eq. 46 as recalled from memory): d_k is the distance of r
// from principal axis k of the fiducials, f_k the RMS distance of the
// fiducials from that axis and FLE² the expected squared 3-D localisation
// error. The axes come from an eigendecomposition of the fiducials' scatter
// matrix, independently of the predictor's code.
func fitzpatrickTRE2(t *testing.T, fid []Vec, fle2 float64, r Vec) float64 {
	n := len(fid)
	var c Vec
	for _, p := range fid {
		c = c.Add(p.Scale(1 / float64(n)))
	}
	scatter := mat.NewSymDense(3, nil)
	for _, p := range fid {
		d := p.Sub(c)
		for a := range 3 {
			for b := a; b < 3; b++ {
				scatter.SetSym(a, b, scatter.At(a, b)+d[a]*d[b])
			}
		}
	}
	var eig mat.EigenSym
	if !eig.Factorize(scatter, true) {
		t.Fatal("eigendecomposition of the fiducial scatter failed")
	}
	var v mat.Dense
	eig.VectorsTo(&v)
	fromAxis := func(x Vec, k int) float64 {
		axis := Vec{v.At(0, k), v.At(1, k), v.At(2, k)}
		along := x.Dot(axis)
		return x.Dot(x) - along*along
	}
	sum := 0.0
	for k := range 3 {
		f2 := 0.0
		for _, p := range fid {
			f2 += fromAxis(p.Sub(c), k) / float64(n)
		}
		sum += fromAxis(r.Sub(c), k) / f2
	}
	return fle2 / float64(n) * (1 + sum/3)
}

// TestRigidPredictorFitzpatrick compares the predicted squared target
// registration error of a rigid fit to a dozen fiducials with the closed
// form of Fitzpatrick, West and Maurer (1998, IEEE Trans. Med. Imaging
// 17(5):694–702), near and far from the fiducial centroid, and both with a
// Monte Carlo of the fit. The closed form is the same first-order analysis
// for equal weights and isotropic noise, so it must agree to rounding; the
// Monte Carlo to a few per cent.
func TestRigidPredictorFitzpatrick(t *testing.T) {
	const (
		sd    = 0.8 // µm per axis
		draws = 20000
	)
	rng := rand.New(rand.NewPCG(41, 42))
	// An elongated cloud, so the three axes differ.
	fid := make([]Vec, 12)
	for i := range fid {
		fid[i] = Vec{5000 + 300*rng.NormFloat64(), -2000 + 120*rng.NormFloat64(), 800 + 40*rng.NormFloat64()}
	}
	truth := randomMap(rng, Rigid, 3, false, 1e5)
	var c Vec
	for _, p := range fid {
		c = c.Add(p.Scale(1.0 / 12))
	}
	points := []struct {
		name string
		r    Vec
	}{
		{"centroid", c},
		{"near the centroid", c.Add(Vec{5, -3, 2})},
		{"at a fiducial", fid[3]},
		{"200 µm out across the cloud", c.Add(Vec{0, 0, 200})},
		{"3 mm out along the cloud", c.Add(Vec{3000, 0, 0})},
		{"3 mm out obliquely", c.Add(Vec{-1500, 2000, 1800})},
	}
	res, err := Fit(Rigid, 3, fid, applyAll(truth, fid), Options{})
	if err != nil {
		t.Fatal(err)
	}
	pred, err := NewPredictor(res.Transform, fid, nil)
	if err != nil {
		t.Fatal(err)
	}
	ones := unitMeanWeights(nil, len(fid))
	got := make([]float64, len(points))
	for range draws {
		dst := noisyTargets(rng, truth, fid, Vec{sd, sd, sd}, ones, 3)
		fit, err := Fit(Rigid, 3, fid, dst, Options{})
		if err != nil {
			t.Fatal(err)
		}
		for j, pt := range points {
			e := fit.Transform.Apply(pt.r).Sub(truth.Apply(pt.r))
			got[j] += e.Dot(e) / draws
		}
	}
	for j, pt := range points {
		t.Run(pt.name, func(t *testing.T) {
			closed := fitzpatrickTRE2(t, fid, 3*sd*sd, pt.r)
			predicted := sd * sd * trace(pred.Factor(pt.r))
			if r := predicted/closed - 1; math.Abs(r) > 1e-9 {
				t.Errorf("predicted ⟨TRE²⟩ %.6g µm², closed form %.6g µm²", predicted, closed)
			}
			if r := got[j]/closed - 1; math.Abs(r) > 0.04 {
				t.Errorf("Monte Carlo ⟨TRE²⟩ %.4g µm², closed form %.4g µm² (%+.1f %%)", got[j], closed, 100*r)
			}
		})
	}
}

// bruteJacobian is the Jacobian of the prediction at p in parameters chosen
// unlike the predictor's, with nothing centred: y = exp([ω]×)·e^λ·A·p + t
// for a rigid motion or similarity, the dim² entries of A then t for an
// affine map, t for a translation.
func bruteJacobian(kind Kind, dim int, a Mat, p Vec) *mat.Dense {
	q := a.MulVec(p)
	switch kind {
	case Translation:
		g := mat.NewDense(dim, dim, nil)
		for k := range dim {
			g.Set(k, k, 1)
		}
		return g
	case Affine:
		g := mat.NewDense(dim, dim*(dim+1), nil)
		for k := range dim {
			for j := range dim {
				g.Set(k, k*(dim+1)+j, p[j])
			}
			g.Set(k, k*(dim+1)+dim, 1)
		}
		return g
	}
	var cols [][]float64 // one column per parameter, dim entries each
	if dim == 3 {
		for k := range 3 {
			var e Vec
			e[k] = 1
			d := cross(e, q) // d/dω_k of exp([ω]×)q at 0
			cols = append(cols, d[:3])
		}
	} else {
		cols = append(cols, []float64{-q[1], q[0]})
	}
	if kind == Similarity {
		cols = append(cols, q[:dim])
	}
	for k := range dim {
		e := make([]float64, dim)
		e[k] = 1
		cols = append(cols, e)
	}
	g := mat.NewDense(dim, len(cols), nil)
	for c, col := range cols {
		for k := range dim {
			g.Set(k, c, col[k])
		}
	}
	return g
}

// bruteHat holds N⁻¹ and the weighted noise moment B = Σ w_i G_iᵀ Σ G_i of
// the linearised fit, built from stacked dense Jacobians.
type bruteHat struct {
	kind Kind
	dim  int
	a    Mat
	ninv *mat.Dense
}

func newBruteHat(t *testing.T, l *Linear, src []Vec, w []float64) *bruteHat {
	var n *mat.Dense
	for i, p := range src {
		g := bruteJacobian(l.Model, l.D, l.A, p)
		var gtg mat.Dense
		gtg.Mul(g.T(), g)
		gtg.Scale(w[i], &gtg)
		if n == nil {
			n = mat.DenseCopyOf(&gtg)
		} else {
			n.Add(n, &gtg)
		}
	}
	var ninv mat.Dense
	if err := ninv.Inverse(n); err != nil {
		t.Fatalf("normal matrix: %v", err)
	}
	return &bruteHat{kind: l.Model, dim: l.D, a: l.A, ninv: &ninv}
}

// sandwich is G(p)·m·G(p)ᵀ as a Mat.
func (b *bruteHat) sandwich(m mat.Matrix, p Vec) Mat {
	g := bruteJacobian(b.kind, b.dim, b.a, p)
	var gm, out mat.Dense
	gm.Mul(g, m)
	out.Mul(&gm, g.T())
	var r Mat
	for i := range b.dim {
		for j := range b.dim {
			r[i][j] = out.At(i, j)
		}
	}
	return r
}

// TestLinearPredictorBruteForce checks Factor, Covariance and
// Result.LOOFactor against hat matrices built from dense Jacobians in
// uncentred parameters (bruteJacobian), for every model in 2-D and 3-D, with
// and without weights: F(p) = G(p)N⁻¹G(p)ᵀ, H_ii = w_i G_i N⁻¹ G_iᵀ, and for
// an affine map or a translation LOOFactor[i] = 1/(w_i(1 − h_ii)) exactly
// (the deleted-residual identity; Cook and Weisberg 1982, Residuals and
// Influence in Regression, Chapman and Hall).
func TestLinearPredictorBruteForce(t *testing.T) {
	rng := rand.New(rand.NewPCG(51, 52))
	for _, kind := range []Kind{Translation, Rigid, Similarity, Affine} {
		for _, dim := range []int{2, 3} {
			for _, weighted := range []bool{false, true} {
				name := string(kind) + map[int]string{2: " 2-D", 3: " 3-D"}[dim]
				if weighted {
					name += " weighted"
				}
				t.Run(name, func(t *testing.T) {
					n := 9
					truth := randomMap(rng, kind, dim, weighted, 500)
					src := randomPoints(rng, n, dim, 300, 150)
					var weights []float64
					if weighted {
						weights = testWeights(rng, n)
					}
					w := unitMeanWeights(weights, n)
					dst := noisyTargets(rng, truth, src, Vec{1, 2, 3}, w, dim)
					res, err := Fit(kind, dim, src, dst, Options{Weights: weights, LeaveOneOut: true})
					if err != nil {
						t.Fatal(err)
					}
					pr, err := NewPredictor(res.Transform, src, weights)
					if err != nil {
						t.Fatal(err)
					}
					lp := pr.(*LinearPredictor)
					bh := newBruteHat(t, res.Transform.(*Linear), src, w)

					// The hat matrix's trace is the number of
					// parameters (per axis for the models fitted axis
					// by axis, where F is a multiple of I).
					hatTrace := 0.0
					for i, p := range src {
						hatTrace += w[i] * trace(lp.Factor(p))
					}
					if _, c := bh.ninv.Dims(); math.Abs(hatTrace-float64(c)) > 1e-9*float64(c) {
						t.Errorf("trace of the hat matrix %.12g, want %d parameters", hatTrace, c)
					}

					for i, p := range src {
						hii := bh.sandwich(bh.ninv, p)
						m := Identity()
						for r := range dim {
							for c := range dim {
								m[r][c] -= w[i] * hii[r][c]
							}
						}
						inv, ok := m.Inverse()
						if !ok {
							t.Fatalf("pair %d: I − H_ii is singular", i)
						}
						want := (trace(inv) - float64(3-dim)) / (float64(dim) * w[i])
						if kind == Translation || kind == Affine {
							want = 1 / (w[i] * (1 - w[i]*hii[0][0]))
						}
						if r := res.LOOFactor[i]/want - 1; math.Abs(r) > 1e-9 {
							t.Errorf("LOOFactor[%d] = %.12g, brute force %.12g", i, res.LOOFactor[i], want)
						}
					}

					noise := randomNoise(rng, dim)
					cov, err := lp.Covariance(noise)
					if err != nil {
						t.Fatal(err)
					}
					b := mat.NewDense(bh.ninv.RawMatrix().Rows, bh.ninv.RawMatrix().Cols, nil)
					for i, p := range src {
						g := bruteJacobian(kind, dim, bh.a, p)
						var gs, gsg mat.Dense
						gs.Mul(g.T(), dense(noise, dim))
						gsg.Mul(&gs, g)
						gsg.Scale(w[i], &gsg)
						b.Add(b, &gsg)
					}
					var nb, param mat.Dense
					nb.Mul(bh.ninv, b)
					param.Mul(&nb, bh.ninv)

					for _, p := range append(randomPoints(rng, 4, dim, 300, 150), randomPoints(rng, 3, dim, 300, 5000)...) {
						want := bh.sandwich(bh.ninv, p)
						got := lp.Factor(p)
						if d := maxAbsDiff(got, want); d > 1e-9*trace(want) {
							t.Errorf("Factor(%v) = %v, brute force %v", p, got, want)
						}
						want = bh.sandwich(&param, p)
						got = cov.At(p)
						if d := maxAbsDiff(got, want); d > 1e-9*trace(want) {
							t.Errorf("Covariance(%v) = %v, brute force %v", p, got, want)
						}
					}
				})
			}
		}
	}
}

// randomNoise is a random symmetric positive definite error covariance
// (µm²), correlated between the axes.
func randomNoise(rng *rand.Rand, dim int) Mat {
	var l, s Mat
	for i := range dim {
		for j := range i + 1 {
			l[i][j] = rng.NormFloat64()
		}
		l[i][i] = 1 + math.Abs(l[i][i])
	}
	for i := range dim {
		for j := range dim {
			for k := range dim {
				s[i][j] += l[i][k] * l[j][k]
			}
		}
	}
	return s
}

// TestLOOFactorMonteCarlo checks over many seeded noise draws that the
// standardised leave-one-out errors LOO[i]_k²/(s_k·LOOFactor[i]) have mean
// 1, for every pair and pooled over the pairs. Translation and affine fits
// are checked axis by axis with anisotropic noise (their factor is exact on
// every axis); rigid and similarity fits with isotropic noise and averaged
// over the axes, which is what their one linearised leverage per pair
// carries. The Monte Carlo standard error comes from the spread of the
// per-draw means, so correlations between pairs and axes are allowed for.
func TestLOOFactorMonteCarlo(t *testing.T) {
	const draws = 4000
	tests := []struct {
		name     string
		kind     Kind
		dim      int
		n        int
		sd       Vec
		weighted bool
	}{
		{name: "translation 3-D z 4× worse weighted", kind: Translation, dim: 3, n: 8, sd: Vec{1, 1, 4}, weighted: true},
		{name: "affine 3-D z 4× worse weighted", kind: Affine, dim: 3, n: 12, sd: Vec{1, 1, 4}, weighted: true},
		{name: "affine 2-D y 3× worse", kind: Affine, dim: 2, n: 7, sd: Vec{1, 3}},
		{name: "rigid 3-D isotropic", kind: Rigid, dim: 3, n: 12, sd: Vec{1, 1, 1}},
		{name: "rigid 3-D isotropic weighted", kind: Rigid, dim: 3, n: 10, sd: Vec{2, 2, 2}, weighted: true},
		{name: "similarity 3-D isotropic", kind: Similarity, dim: 3, n: 8, sd: Vec{1, 1, 1}},
		{name: "rigid 2-D isotropic", kind: Rigid, dim: 2, n: 6, sd: Vec{1, 1}},
		{name: "similarity 2-D isotropic weighted", kind: Similarity, dim: 2, n: 6, sd: Vec{1, 1}, weighted: true},
	}
	rng := rand.New(rand.NewPCG(61, 62))
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			truth := randomMap(rng, tt.kind, tt.dim, false, 1e4)
			src := randomPoints(rng, tt.n, tt.dim, 5e3, 150)
			var weights []float64
			if tt.weighted {
				weights = testWeights(rng, tt.n)
			}
			w := unitMeanWeights(weights, tt.n)
			perAxis := tt.kind == Translation || tt.kind == Affine
			groups := tt.n // statistics: per pair, or per pair and axis
			if perAxis {
				groups *= tt.dim
			}
			sum := make([]float64, groups+1) // the last is pooled
			sumSq := make([]float64, groups+1)
			stat := make([]float64, groups+1)
			for range draws {
				dst := noisyTargets(rng, truth, src, tt.sd, w, tt.dim)
				res, err := Fit(tt.kind, tt.dim, src, dst, Options{Weights: weights, LeaveOneOut: true})
				if err != nil {
					t.Fatal(err)
				}
				clear(stat)
				for i, r := range res.LOO {
					for k := range tt.dim {
						z2 := r[k] * r[k] / (tt.sd[k] * tt.sd[k] * res.LOOFactor[i])
						if perAxis {
							stat[i*tt.dim+k] = z2
						} else {
							stat[i] += z2 / float64(tt.dim)
						}
						stat[groups] += z2 / float64(tt.n*tt.dim)
					}
				}
				for g, v := range stat {
					sum[g] += v
					sumSq[g] += v * v
				}
			}
			for g := range sum {
				mean := sum[g] / draws
				se := math.Sqrt((sumSq[g]/draws - mean*mean) / draws)
				limit := 4.5 * se
				what := "pooled"
				if g < groups {
					what = "pair " + strconv.Itoa(g/max(1, groups/tt.n))
					if perAxis {
						what += " axis " + strconv.Itoa(g%tt.dim)
					}
				} else {
					limit = 4 * se
					t.Logf("pooled mean %.4f ± %.4f", mean, se)
				}
				if math.Abs(mean-1) > limit {
					t.Errorf("%s: mean standardised squared leave-one-out error %.4f ± %.4f, want 1", what, mean, se)
				}
			}
		})
	}
}

// TestLinearPredictorFactorShape checks, at random points near and far, that
// F is symmetric and positive semi-definite, that it is a multiple of I for
// an affine map and a translation (I/N for the latter), that its 2-D z row
// and column are zero, and that Covariance(s·I) is s·F.
func TestLinearPredictorFactorShape(t *testing.T) {
	rng := rand.New(rand.NewPCG(71, 72))
	for _, kind := range []Kind{Translation, Rigid, Similarity, Affine} {
		for _, dim := range []int{2, 3} {
			t.Run(string(kind)+map[int]string{2: " 2-D", 3: " 3-D"}[dim], func(t *testing.T) {
				n := 7
				src := randomPoints(rng, n, dim, 1e5, 300)
				dst := addNoise(rng, applyAll(randomMap(rng, kind, dim, true, 1e5), src), dim, 1)
				weights := testWeights(rng, n)
				res, err := Fit(kind, dim, src, dst, Options{Weights: weights})
				if err != nil {
					t.Fatal(err)
				}
				pr, err := NewPredictor(res.Transform, src, weights)
				if err != nil {
					t.Fatal(err)
				}
				iso, err := pr.(*LinearPredictor).Covariance(diagonal(Vec{2.5, 2.5, 2.5}, dim))
				if err != nil {
					t.Fatal(err)
				}
				for _, p := range append(randomPoints(rng, 20, dim, 1e5, 400), randomPoints(rng, 20, dim, 1e5, 1e4)...) {
					f := pr.Factor(p)
					if f != f.T() {
						t.Fatalf("F(%v) = %v is not symmetric", p, f)
					}
					if dim == 2 && (f[2] != Vec{} || f[0][2] != 0 || f[1][2] != 0) {
						t.Errorf("2-D F(%v) = %v has a z row or column", p, f)
					}
					var eig mat.EigenSym
					if !eig.Factorize(mat.NewSymDense(dim, flatten(f, dim)), false) {
						t.Fatal("eigendecomposition failed")
					}
					for _, v := range eig.Values(nil) {
						if v < -1e-12*trace(f) {
							t.Errorf("F(%v) has eigenvalue %g", p, v)
						}
					}
					if kind == Translation || kind == Affine {
						want := diagonal(Vec{f[0][0], f[0][0], f[0][0]}, dim)
						if f != want {
							t.Errorf("F(%v) = %v is not a multiple of I", p, f)
						}
					}
					if kind == Translation && math.Abs(f[0][0]-1/float64(n)) > 1e-15 {
						t.Errorf("translation F(%v) = %g·I, want I/%d", p, f[0][0], n)
					}
					want := f
					for i := range 3 {
						for j := range 3 {
							want[i][j] *= 2.5
						}
					}
					if d := maxAbsDiff(iso.At(p), want); d > 1e-12*trace(want) {
						t.Errorf("Covariance(2.5·I) at %v is %v, want 2.5·F = %v", p, iso.At(p), want)
					}
				}
			})
		}
	}
}

func flatten(m Mat, dim int) []float64 {
	var out []float64
	for i := range dim {
		out = append(out, m[i][:dim]...)
	}
	return out
}

// TestNewPredictorErrors: inputs from which no predictor can be built are
// refused with a message that says why.
func TestNewPredictorErrors(t *testing.T) {
	rigid := &Linear{Model: Rigid, D: 3, A: Identity(), Scale: 1}
	flat := &Linear{Model: Rigid, D: 2, A: Identity(), Scale: 1}
	affine := &Linear{Model: Affine, D: 3, A: Identity()}
	cloud := []Vec{{0, 0, 0}, {100, 0, 0}, {0, 100, 0}, {0, 0, 100}}
	line := []Vec{{0, 0, 0}, {100, 100, 100}, {200, 200, 200}, {300, 300, 300}}
	plane := []Vec{{0, 0, 5}, {100, 0, 5}, {0, 100, 5}, {100, 100, 5}}
	chain, err := NewChain(rigid, affine)
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name    string
		t       Transform
		src     []Vec
		weights []float64
		want    string
	}{
		{"no transform", nil, cloud, nil, "no transform"},
		{"chain", chain, cloud, nil, "chain of fitted transforms"},
		{"invalid transform", &Linear{Model: Rigid, D: 3, A: Mat{{2, 0, 0}, {0, 1, 0}, {0, 0, 1}}}, cloud, nil, "not orthogonal"},
		{"too few landmarks", affine, cloud[:3], nil, "at least 4 source landmarks, have 3"},
		{"weights of another length", rigid, cloud, []float64{1, 2}, "2 weights for 4 source landmarks"},
		{"zero weight", rigid, cloud, []float64{1, 0, 1, 1}, "landmark 1 has weight 0"},
		{"infinite coordinate", rigid, []Vec{{0, 0, 0}, {1, 0, math.Inf(1)}, {0, 1, 0}}, nil, "source landmark 1 has a coordinate that is not a finite number"},
		{"z in 2-D", flat, []Vec{{0, 0}, {1, 0, 1}}, nil, "source landmark 1 has a z coordinate"},
		{"coincident", rigid, []Vec{{7, 7, 7}, {7, 7, 7}, {7, 7, 7}}, nil, "coincide"},
		{"rigid on a line", rigid, line, nil, "lie on a line"},
		{"affine on a plane", affine, plane, nil, "lie on a plane"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			p, err := NewPredictor(tt.t, tt.src, tt.weights)
			if err == nil {
				t.Fatalf("no error; predictor %v", p)
			}
			if p != nil {
				t.Errorf("predictor %v returned with the error", p)
			}
			if !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %q does not say %q", err, tt.want)
			}
		})
	}
}

// TestPredictionCovarianceErrors: a noise covariance that is not one is
// refused.
func TestPredictionCovarianceErrors(t *testing.T) {
	src := []Vec{{0, 0, 0}, {100, 0, 0}, {0, 100, 0}, {0, 0, 100}}
	pr, err := NewPredictor(&Linear{Model: Rigid, D: 3, A: Identity(), Scale: 1}, src, nil)
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name  string
		noise Mat
		want  string
	}{
		{"not symmetric", Mat{{1, 0.5, 0}, {0, 1, 0}, {0, 0, 1}}, "not symmetric"},
		{"negative variance", Mat{{1, 0, 0}, {0, -1, 0}, {0, 0, 1}}, "variance -1 µm² on axis 1"},
		{"not a number", Mat{{1, 0, 0}, {0, 1, 0}, {0, 0, math.NaN()}}, "entry (2,2) is NaN"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := pr.(*LinearPredictor).Covariance(tt.noise)
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %v, want one saying %q", err, tt.want)
			}
		})
	}
}

// TestLinearPredictorConcurrent: many goroutines share one predictor and
// one covariance and get what a single goroutine gets (run with -race).
func TestLinearPredictorConcurrent(t *testing.T) {
	rng := rand.New(rand.NewPCG(81, 82))
	src := randomPoints(rng, 20, 3, 1e4, 300)
	res, err := Fit(Similarity, 3, src, addNoise(rng, applyAll(randomMap(rng, Similarity, 3, false, 0), src), 3, 1), Options{})
	if err != nil {
		t.Fatal(err)
	}
	pr, err := NewPredictor(res.Transform, src, nil)
	if err != nil {
		t.Fatal(err)
	}
	cov, err := pr.(*LinearPredictor).Covariance(diagonal(Vec{1, 1, 16}, 3))
	if err != nil {
		t.Fatal(err)
	}
	points := randomPoints(rng, 500, 3, 1e4, 2000)
	wantF, wantC := make([]Mat, len(points)), make([]Mat, len(points))
	for i, p := range points {
		wantF[i], wantC[i] = pr.Factor(p), cov.At(p)
	}
	var wg sync.WaitGroup
	errs := make([]int, 4)
	for g := range errs {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i, p := range points {
				if pr.Factor(p) != wantF[i] || cov.At(p) != wantC[i] {
					errs[g]++
				}
			}
		}()
	}
	wg.Wait()
	for g, n := range errs {
		if n > 0 {
			t.Errorf("goroutine %d got %d results that differ from the serial ones", g, n)
		}
	}
}

func benchmarkPredictor(b *testing.B, kind Kind) {
	rng := rand.New(rand.NewPCG(91, 92))
	src := randomPoints(rng, 50, 3, 1e4, 300)
	res, err := Fit(kind, 3, src, addNoise(rng, applyAll(randomMap(rng, kind, 3, false, 0), src), 3, 1), Options{})
	if err != nil {
		b.Fatal(err)
	}
	pr, err := NewPredictor(res.Transform, src, nil)
	if err != nil {
		b.Fatal(err)
	}
	points := randomPoints(rng, 1024, 3, 1e4, 2000)
	var sink Mat
	i := 0
	for b.Loop() {
		sink = pr.Factor(points[i&1023])
		i++
	}
	_ = sink
}

func BenchmarkLinearPredictorFactor(b *testing.B) {
	for _, kind := range []Kind{Translation, Rigid, Similarity, Affine} {
		b.Run(string(kind), func(b *testing.B) { benchmarkPredictor(b, kind) })
	}
}

func BenchmarkPredictionCovarianceAt(b *testing.B) {
	rng := rand.New(rand.NewPCG(93, 94))
	src := randomPoints(rng, 50, 3, 1e4, 300)
	res, err := Fit(Similarity, 3, src, addNoise(rng, applyAll(randomMap(rng, Similarity, 3, false, 0), src), 3, 1), Options{})
	if err != nil {
		b.Fatal(err)
	}
	pr, err := NewPredictor(res.Transform, src, nil)
	if err != nil {
		b.Fatal(err)
	}
	cov, err := pr.(*LinearPredictor).Covariance(diagonal(Vec{1, 1, 16}, 3))
	if err != nil {
		b.Fatal(err)
	}
	points := randomPoints(rng, 1024, 3, 1e4, 2000)
	var sink Mat
	i := 0
	for b.Loop() {
		sink = cov.At(points[i&1023])
		i++
	}
	_ = sink
}
