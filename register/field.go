package register

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"

	"ferry/internal/parallel"
	"ferry/landmarks"
	"ferry/transform"
)

// The error model of the registration: the landmarks' targets are an affine
// map of their sources plus a displacement field and picking noise,
//
//	q_ik = (A·x_i + b)_k + f_k(x_i) + ε_ik,
//
// f_k a zero-mean Gaussian random field on each target axis k with
// covariance s_k·ρ(|x − z|/ℓ), ρ a Matérn correlation (Stein 1999,
// "Interpolation of Spatial Data: Some Theory for Kriging", Springer, §2.7)
// of smoothness ν ∈ {1/2, 3/2, 5/2} and correlation length ℓ shared by the
// axes, and ε_ik independent noise of variance s_k·λ_k·D_i, D_i the relative
// noise of landmark i's kind (1 for the first kind). This is universal
// kriging (Cressie 1993, "Statistics for Spatial Data", §3.4); the
// thin-plate spline in 3-D is the limit ℓ → ∞ of ν = 1/2, whose
// correlation 1 − r/ℓ + … is the spline's generalised covariance −r up to
// the constant the affine trend absorbs (Wahba 1990, "Spline Models for
// Observational Data", SIAM, ch. 1; Matheron 1973). The finite ℓ is what
// lets a bend that moves a landmark's neighbours the same way be part of
// the field, and what makes the variance of an extrapolated point grow
// beyond the landmarks.
//
// ν, ℓ, the kinds' D and each axis's λ_k are chosen by restricted maximum
// likelihood (REML; Patterson & Thompson 1971, Biometrika 58:545–554;
// Rasmussen & Williams 2006, "Gaussian Processes for Machine Learning", MIT
// Press, §5.4 for the evidence; Harville 1977, JASA 72:320–338 for the
// restricted form) over a grid, with s_k profiled out in closed form. With
// the kinds' noise whitened away, the restricted likelihood of axis k is
// that of the contrasts c = Wᵀỹ_k, W = Z·V, Z an orthonormal basis of the
// contrasts that annihilate the affine trend and ZᵀK̃Z = V·diag(μ)·Vᵀ:
//
//	ℓ_k(λ) = −½[(n−m)·log ŝ + Σ log(μ_j + λ) + (n−m)],  ŝ = Σ c_j²/(μ_j+λ)/(n−m),
//
// so one eigendecomposition a correlation length serves every λ and every
// axis. Leave-one-out predictions under the model are exact and cost no
// refit (Dubrule 1983, Math. Geol. 15:687–699): with G = W·diag(1/(μ+λ))·Wᵀ,
// the error of predicting landmark i from the others is (Gỹ)_i/G_ii and its
// variance ŝ/G_ii (whitened units).

// fieldMinLandmarks is the fewest landmarks from which the field's length
// and amplitude are estimated; below, the check falls back to the spline's
// own kriging variance with one scale per axis.
const fieldMinLandmarks = 12

// fieldMinPerKind is the fewest landmarks of each kind from which the
// kinds' relative noise is estimated, as for the older check.
const fieldMinPerKind = minPerKind

// fieldMaxLandmarks bounds the landmarks the field is estimated from: the
// grid costs a few dozen eigendecompositions of an N×N matrix.
const fieldMaxLandmarks = 600

// FieldParams are the fitted parameters of the error model.
type FieldParams struct {
	// Smoothness is the Matérn ν (1/2, 3/2 or 5/2); Length is ℓ (µm).
	Smoothness float64 `json:"smoothness"`
	Length     float64 `json:"length_um"`
	// Amplitude is s_k, the field's variance per target axis (µm²).
	Amplitude transform.Vec `json:"amplitude_um2"`
	// Noise is λ_k, the picking-noise variance of a landmark of the first
	// kind relative to Amplitude.
	Noise transform.Vec `json:"noise"`
	// Kinds lists the kinds with their relative noise D (first kind 1).
	Kinds map[landmarks.Kind]float64 `json:"kind_noise"`
	// Outside is the factor per axis by which the variances of points
	// outside the landmarks' hull are multiplied (calibrateField: the
	// leave-one-out errors of the landmarks on the hull set it apart from
	// those inside); zero means 1, as in files written before it.
	Outside transform.Vec `json:"outside_scale,omitempty"`
}

// outsideScale is the factor of axis k for a point outside the hull.
func (p *FieldParams) outsideScale(k int) float64 {
	if p.Outside[k] > 0 {
		return p.Outside[k]
	}
	return 1
}

// corr is the Matérn correlation at distance r (µm).
func (p *FieldParams) corr(r float64) float64 {
	return maternCorr(p.Smoothness, r/p.Length)
}

func maternCorr(nu, t float64) float64 {
	switch nu {
	case 0.5:
		return math.Exp(-t)
	case 1.5:
		a := math.Sqrt(3) * t
		return (1 + a) * math.Exp(-a)
	default:
		a := math.Sqrt(5) * t
		return (1 + a + a*a/3) * math.Exp(-a)
	}
}

// kindNoise is D for a kind (1 for a kind the fit did not see).
func (p *FieldParams) kindNoise(k landmarks.Kind) float64 {
	if d, ok := p.Kinds[k]; ok {
		return d
	}
	return 1
}

// fieldFit is the error model fitted to a landmark set, with every
// landmark's leave-one-out error and its predicted variance.
type fieldFit struct {
	params FieldParams
	logLik float64
	// loo[i] is target minus the model's prediction from the others (µm),
	// looVar[i] its predicted variance per axis (µm²), and score[i] the
	// externally studentised Σ_k loo²/looVar.
	loo    []transform.Vec
	looVar []transform.Vec
	score  []float64
	// dof is n − m, the number of contrasts.
	dof int
}

// fieldBasis is what one correlation length and one set of kind noises
// share over every axis and every λ.
type fieldBasis struct {
	n, m int
	d    []float64 // √D_i
	// ps holds the projected kernel ZᵀK̃Z reduced once for every λ
	// (transform.ProjectedSym); mu are its eigenvalues, clipped at 0.
	ps *transform.ProjectedSym
	mu []float64
	// logCorr is −½Σlog D_i − ½log|P̃ᵀP̃| (P̃ = D^−½·P): the restricted likelihood of
	// the raw targets differs from that of the whitened ones by it.
	logCorr float64
	y       [3][]float64 // whitened targets per axis
	c       [3][]float64 // contrasts per axis
}

// newFieldBasis builds the basis of src with kind noises D.
func newFieldBasis(dim int, src, dst []transform.Vec, D []float64, nu, length float64) (*fieldBasis, error) {
	n, m := len(src), dim+1
	if n <= m+1 {
		return nil, errors.New("too few landmarks for the error model")
	}
	b := &fieldBasis{n: n, m: m, d: make([]float64, n)}
	centre := centroidOf(src)
	spread := 0.0
	for _, x := range src {
		spread = math.Max(spread, x.Sub(centre).Norm())
	}
	if !(spread > 0) {
		return nil, errors.New("landmarks at one position")
	}
	P := mat.NewDense(n, m, nil)
	for i, x := range src {
		b.d[i] = math.Sqrt(D[i])
		b.logCorr -= 0.5 * math.Log(D[i])
		P.Set(i, 0, 1/b.d[i])
		for l := range dim {
			P.Set(i, 1+l, (x[l]-centre[l])/spread/b.d[i])
		}
	}
	var ptp mat.SymDense
	ptp.SymOuterK(1, P.T())
	var chol mat.Cholesky
	if !chol.Factorize(&ptp) {
		return nil, errors.New("the landmarks do not span the volume")
	}
	b.logCorr -= 0.5 * chol.LogDet()
	cols := make([][]float64, m)
	for l := range m {
		cols[l] = make([]float64, n)
		for i := range n {
			cols[l][i] = P.At(i, l)
		}
	}
	K := make([]float64, n*n)
	for i := range n {
		for j := i; j < n; j++ {
			v := maternCorr(nu, src[i].Sub(src[j]).Norm()/length) / (b.d[i] * b.d[j])
			K[i*n+j], K[j*n+i] = v, v
		}
	}
	var err error
	if b.ps, err = transform.NewProjectedSym(cols, K); err != nil {
		return nil, fmt.Errorf("the error model: %w", err)
	}
	b.mu = append([]float64(nil), b.ps.Eigenvalues()...)
	for j := range b.mu {
		b.mu[j] = math.Max(b.mu[j], 0)
	}
	// Targets relative to their mean: the trend absorbs the mean exactly,
	// and EM coordinates near 1e5 µm would otherwise cost digits.
	var mean transform.Vec
	for _, q := range dst {
		mean = mean.Add(q)
	}
	mean = mean.Scale(1 / float64(n))
	for k := range dim {
		b.y[k] = make([]float64, n)
		for i, q := range dst {
			b.y[k][i] = (q[k] - mean[k]) / b.d[i]
		}
		b.c[k] = b.ps.Contrasts(b.y[k])
	}
	return b, nil
}

// fitField fits the error model to the landmarks. With fixed given, its
// smoothness, length and kind noises are kept and only λ and s are
// re-estimated (the cheap refit of sequential deletion).
func fitField(dim int, src, dst []transform.Vec, kinds []landmarks.Kind, fixed *FieldParams, criterion fieldCriterion) (*fieldFit, error) {
	n := len(src)
	if n > fieldMaxLandmarks {
		return nil, fmt.Errorf("%d landmarks: the error model is estimated from at most %d", n, fieldMaxLandmarks)
	}
	dFor := func(kn map[landmarks.Kind]float64) []float64 {
		D := make([]float64, n)
		for i, k := range kinds {
			D[i] = 1
			if v, ok := kn[k]; ok {
				D[i] = v
			}
		}
		return D
	}
	type trial struct {
		nu, length float64
		kn         map[landmarks.Kind]float64
		b          *fieldBasis
		lambda, s  transform.Vec
		ll         float64
	}
	try := func(nu, length float64, kn map[landmarks.Kind]float64) (*trial, error) {
		b, err := newFieldBasis(dim, src, dst, dFor(kn), nu, length)
		if err != nil {
			return nil, err
		}
		t := &trial{nu: nu, length: length, kn: kn, b: b}
		t.lambda, t.s, t.ll = b.evaluate(dim)
		if criterion == byLOO {
			t.ll = b.looLogDensity(dim, t.lambda, t.s)
		}
		return t, nil
	}
	var best *trial
	consider := func(t *trial) {
		if best == nil || t.ll > best.ll {
			best = t
		}
	}
	if fixed != nil {
		t, err := try(fixed.Smoothness, fixed.Length, fixed.Kinds)
		if err != nil {
			return nil, err
		}
		best = t
	} else {
		extent := 0.0
		c := centroidOf(src)
		for _, x := range src {
			extent = math.Max(extent, x.Sub(c).Norm())
		}
		extent *= 2
		spacing := nearestSpacing(src)
		kinds0 := map[landmarks.Kind]float64{}
		var lengths []float64
		for e := 0; e < 6; e++ {
			l := math.Max(spacing, 0.02*extent) * math.Pow(2*extent/math.Max(spacing, 0.02*extent), float64(e)/5)
			lengths = append(lengths, l)
		}
		// The grid's trials are independent: they run side by side and
		// are considered in the grid's order, as one after the other.
		var grid [][2]float64
		for _, nu := range []float64{0.5, 1.5, 2.5} {
			for _, l := range lengths {
				grid = append(grid, [2]float64{nu, l})
			}
		}
		trials, errs := make([]*trial, len(grid)), make([]error, len(grid))
		parallel.Ranges(len(grid), 1, func(lo, hi int) {
			for i := lo; i < hi; i++ {
				trials[i], errs[i] = try(grid[i][0], grid[i][1], kinds0)
			}
		})
		for i, t := range trials {
			if errs[i] != nil {
				return nil, errs[i]
			}
			consider(t)
		}
		// The kinds' relative noise, one kind at a time, where each kind
		// has enough landmarks to speak for itself. Variance ratios from
		// 1/4 to 4: kinds picked in the same volumes differ by about as
		// much, and a wider range lets a few dozen landmarks trade one
		// kind's noise against the field.
		counts := map[landmarks.Kind]int{}
		for _, k := range kinds {
			counts[k]++
		}
		var ks []landmarks.Kind
		for k := range counts {
			ks = append(ks, k)
		}
		sort.Slice(ks, func(i, j int) bool { return ks[i] < ks[j] })
		enough := len(ks) >= 2
		for _, k := range ks {
			enough = enough && counts[k] >= fieldMinPerKind
		}
		if enough {
			for _, k := range ks[1:] {
				base := best
				ratios := []float64{1.0 / 4, 1.0 / 2, 2, 4}
				kns := make([]map[landmarks.Kind]float64, len(ratios))
				for i, r := range ratios {
					kns[i] = map[landmarks.Kind]float64{}
					for kk, v := range base.kn {
						kns[i][kk] = v
					}
					kns[i][k] = r
				}
				// As the grid: side by side, considered in order.
				ts, errs := make([]*trial, len(kns)), make([]error, len(kns))
				parallel.Ranges(len(kns), 1, func(lo, hi int) {
					for i := lo; i < hi; i++ {
						ts[i], errs[i] = try(base.nu, base.length, kns[i])
					}
				})
				for i, t := range ts {
					if errs[i] != nil {
						return nil, errs[i]
					}
					consider(t)
				}
			}
		}
		// Refine the length around the best.
		for _, f := range []float64{0.7, 1.4} {
			t, err := try(best.nu, best.length*f, best.kn)
			if err != nil {
				return nil, err
			}
			consider(t)
		}
		if enough && criterion == byLOO {
			// For the radii, the kinds' noise ratios refined around
			// the best, by √2 and then 2^¼ either side: a mapped
			// cell's own picking noise is a soma's, most of its radius
			// where the map is good, and the grid's factor of 2 alone
			// may leave it 40 % off (docs/error-model.md, "Where the
			// radii miss"). The flags keep the coarse grid.
			for _, k := range ks[1:] {
				for _, step := range []float64{math.Sqrt2, math.Sqrt(math.Sqrt2)} {
					base := best
					for _, f := range []float64{1 / step, step} {
						kn := map[landmarks.Kind]float64{}
						for kk, v := range base.kn {
							kn[kk] = v
						}
						d := 1.0
						if v, ok := base.kn[k]; ok {
							d = v
						}
						kn[k] = d * f
						t, err := try(base.nu, base.length, kn)
						if err != nil {
							return nil, err
						}
						consider(t)
					}
				}
			}
		}
	}
	fit := &fieldFit{
		params: FieldParams{Smoothness: best.nu, Length: best.length, Amplitude: best.s, Noise: best.lambda, Kinds: map[landmarks.Kind]float64{}},
		logLik: best.ll, dof: n - dim - 1,
	}
	if criterion == byLOO {
		// The model for the radii: λ and s averaged over λ's posterior.
		for k := range dim {
			sv, sl := best.b.averagedNoise(k)
			if sv > 0 {
				fit.params.Amplitude[k], fit.params.Noise[k] = sv, sl/sv
			}
		}
	}
	D := dFor(best.kn)
	for _, k := range kinds {
		fit.params.Kinds[k] = D[indexOfKind(kinds, k)]
	}
	fit.loo, fit.looVar, fit.score = best.b.leaveOneOut(dim, best.lambda, best.s)
	return fit, nil
}

func indexOfKind(kinds []landmarks.Kind, k landmarks.Kind) int {
	for i, kk := range kinds {
		if kk == k {
			return i
		}
	}
	return -1
}

// leaveOneOut returns each landmark's leave-one-out error (µm), its
// predicted variance per axis (µm²) and its externally studentised score:
// each axis's term r = e²/v rescaled by ŝ/ŝ₍₋ᵢ₎ = (n−m−1)/(n−m−r), the scale
// estimated without the landmark (the drop of the quadratic form on
// deleting a point is exactly r·ŝ).
func (b *fieldBasis) leaveOneOut(dim int, lambda, s transform.Vec) (loo, vars []transform.Vec, score []float64) {
	n := b.n
	loo, vars, score = make([]transform.Vec, n), make([]transform.Vec, n), make([]float64, n)
	dof := float64(b.n - b.m)
	for k := range dim {
		giis, gys, err := b.ps.LeaveOneOut(b.c[k], lambda[k])
		if err != nil {
			for i := range n {
				score[i] = math.Inf(1)
			}
			continue
		}
		for i := range n {
			gii, gy := giis[i], gys[i]
			e := gy / gii
			v := s[k] / gii
			loo[i][k] = b.d[i] * e
			vars[i][k] = b.d[i] * b.d[i] * v
			r := e * e / v
			if dof-r > 1e-9 {
				score[i] += r * (dof - 1) / (dof - r)
			} else {
				score[i] = math.Inf(1)
			}
		}
	}
	return loo, vars, score
}

// FieldVariance is the variance per target axis (µm²) of the error of a
// linear predictor at x, under the fitted error model: with a the
// predictor's cardinal weights on the landmarks at src (Σa = 1, Σa·x_j = x,
// so the affine trend cancels), ρ_j the correlation between x and src[j],
// R the landmarks' correlations and D their kinds' noises,
//
//	v_k = s_k·(1 − 2aᵀρ + aᵀRa + λ_k·aᵀDa),
//
// the error of the predicted position against the field's true value. A
// new point's own picking noise, s_k·λ_k·D_new, is not in it.
func (p *FieldParams) variance(x transform.Vec, src []transform.Vec, D []float64, corr [][]float64, a []float64) transform.Vec {
	rho, ra, ada := 0.0, 0.0, 0.0
	for j, aj := range a {
		rho += aj * p.corr(x.Sub(src[j]).Norm())
		ada += aj * aj * D[j]
		row := corr[j]
		t := 0.0
		for l, al := range a {
			t += row[l] * al
		}
		ra += aj * t
	}
	var v transform.Vec
	for k := range 3 {
		if p.Amplitude[k] > 0 {
			v[k] = p.Amplitude[k] * math.Max(1-2*rho+ra+p.Noise[k]*ada, 0)
		}
	}
	return v
}
