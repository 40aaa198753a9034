package transform

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"ferry/internal/parallel"
)

// fitLinear fits a translation, rigid, similarity or affine map to pairs
// that Fit has already checked for length, finiteness, weights and count.
func fitLinear(kind Kind, dim int, src, dst []Vec, opt Options) (*Result, error) {
	p := centre(dim, src, dst, opt.Weights)
	var (
		res *Result
		err error
	)
	switch kind {
	case Translation:
		res, err = p.fitTranslation(opt.LeaveOneOut)
	case Rigid, Similarity:
		res, err = p.fitOrthogonal(kind, opt.NoMirror, opt.LeaveOneOut)
	case Affine:
		res, err = p.fitAffine(opt.LeaveOneOut)
	default:
		return nil, fmt.Errorf("%q is not a linear model", kind)
	}
	if err == nil && opt.LeaveOneOut {
		// The variance factors come from the leverages of the fitted
		// model, linearised for a rigid motion or similarity, with the
		// weights scaled to a mean of 1 as for NewPredictor.
		var lp *LinearPredictor
		lp, err = newLinearPredictor(res.Transform.(*Linear), src, opt.Weights)
		if err == nil {
			res.LOOFactor, err = lp.looFactors(src)
		}
	}
	if err != nil {
		return nil, fmt.Errorf("%s fit in %d-D: %w", kind, dim, err)
	}
	return res, nil
}

// pairs holds landmark pairs moved to their weighted centroids, so that
// products of coordinates of 1e5 µm do not swamp the spread of the points.
type pairs struct {
	dim  int
	x, y []Vec     // centred source and target
	w    []float64 // weights scaled to sum to 1
	// cx, cy are the weighted centroids, in the input frame.
	cx, cy Vec
}

func centre(dim int, src, dst []Vec, weights []float64) *pairs {
	n := len(src)
	p := &pairs{dim: dim, x: make([]Vec, n), y: make([]Vec, n), w: make([]float64, n)}
	total := 0.0
	for i := range n {
		p.w[i] = 1
		if weights != nil {
			p.w[i] = weights[i]
		}
		total += p.w[i]
	}
	for i := range p.w {
		p.w[i] /= total
	}
	p.cx = centroid(src, p.w)
	p.cy = centroid(dst, p.w)
	for i := range n {
		p.x[i] = src[i].Sub(p.cx)
		p.y[i] = dst[i].Sub(p.cy)
	}
	return p
}

// centroid is the weighted mean of v (weights summing to 1), summed relative
// to v[0] so that large common offsets do not cost precision.
func centroid(v []Vec, w []float64) Vec {
	var m Vec
	for i := range v {
		m = m.Add(v[i].Sub(v[0]).Scale(w[i]))
	}
	return v[0].Add(m)
}

// moments are the weighted first and second moments of the pairs, in the
// centred frame, over all pairs but one (or all).
type moments struct {
	mx, my        Vec // weighted means
	cxx, cyy, cxy Mat // Σ w (x−mx)(x−mx)ᵀ, Σ w (y−my)(y−my)ᵀ, Σ w (y−my)(x−mx)ᵀ over Σ w
}

// moments over every pair except skip (−1 skips none).
func (p *pairs) moments(skip int) moments {
	var mo moments
	total := 0.0
	for i := range p.x {
		if i == skip {
			continue
		}
		total += p.w[i]
		mo.mx = mo.mx.Add(p.x[i].Scale(p.w[i]))
		mo.my = mo.my.Add(p.y[i].Scale(p.w[i]))
	}
	mo.mx = mo.mx.Scale(1 / total)
	mo.my = mo.my.Scale(1 / total)
	for i := range p.x {
		if i == skip {
			continue
		}
		w := p.w[i] / total
		a, b := p.x[i].Sub(mo.mx), p.y[i].Sub(mo.my)
		for r := range p.dim {
			for c := range p.dim {
				mo.cxx[r][c] += w * a[r] * a[c]
				mo.cyy[r][c] += w * b[r] * b[c]
				mo.cxy[r][c] += w * b[r] * a[c]
			}
		}
	}
	return mo
}

func (p *pairs) fitTranslation(loo bool) (*Result, error) {
	mo := p.moments(-1)
	t := p.cy.Add(mo.my).Sub(p.cx.Add(mo.mx))
	l := &Linear{Model: Translation, D: p.dim, A: Identity(), T: t, Scale: 1}
	res := &Result{Transform: l, Residuals: make([]Vec, len(p.x))}
	shift := mo.my.Sub(mo.mx)
	for i := range p.x {
		res.Residuals[i] = p.y[i].Sub(p.x[i]).Sub(shift)
	}
	if !loo {
		return res, nil
	}
	// The translation fitted without pair i is the weighted mean
	// displacement of the others; prefix and suffix sums give every one of
	// them exactly in O(N), without the cancellation of (total − own).
	n := len(p.x)
	preW, sufW := make([]float64, n+1), make([]float64, n+1)
	preD, sufD := make([]Vec, n+1), make([]Vec, n+1)
	for i := range n {
		d := p.y[i].Sub(p.x[i])
		preW[i+1] = preW[i] + p.w[i]
		preD[i+1] = preD[i].Add(d.Scale(p.w[i]))
	}
	for i := n - 1; i >= 0; i-- {
		d := p.y[i].Sub(p.x[i])
		sufW[i] = sufW[i+1] + p.w[i]
		sufD[i] = sufD[i+1].Add(d.Scale(p.w[i]))
	}
	res.LOO = make([]Vec, n)
	for i := range n {
		others := preD[i].Add(sufD[i+1]).Scale(1 / (preW[i] + sufW[i+1]))
		res.LOO[i] = p.y[i].Sub(p.x[i]).Sub(others)
	}
	return res, nil
}

// fitAffine fits A and t by weighted least squares on [p, 1]. After
// centring at the weighted centroid the intercept separates from A, which
// solves the N×dim problem √w·(x − μx)·Aᵀ ≈ √w·(y − μy) through its SVD
// (better conditioned than the normal equations). The same SVD gives the
// leverages, h_ii = w_i + |U_i|², and the exact leave-one-out residuals
// r_i/(1 − h_ii) of weighted least squares (the deleted-residual identity;
// Cook and Weisberg 1982, Residuals and Influence in Regression, Chapman and
// Hall).
func (p *pairs) fitAffine(loo bool) (*Result, error) {
	mo := p.moments(-1)
	dim, n := p.dim, len(p.x)
	sx := math.Sqrt(trace(mo.cxx))
	if sx <= coincideTol*(p.cx.Norm()+sx) {
		return nil, fmt.Errorf("all source points coincide (RMS spread %.3g µm)", sx)
	}
	xw, yw := mat.NewDense(n, dim, nil), mat.NewDense(n, dim, nil)
	for i := range n {
		s := math.Sqrt(p.w[i])
		a, b := p.x[i].Sub(mo.mx), p.y[i].Sub(mo.my)
		for k := range dim {
			xw.Set(i, k, s*a[k])
			yw.Set(i, k, s*b[k])
		}
	}
	var svd mat.SVD
	if !svd.Factorize(xw, mat.SVDThin) {
		return nil, errors.New("singular value decomposition of the source points failed")
	}
	sv := svd.Values(nil)
	if sv[dim-1] <= flatTol*sv[0] {
		return nil, fmt.Errorf("source points lie on a %s (RMS extent %.3g µm across it against %.3g µm along it): the affine map off it is undetermined", flatShape(dim), sv[dim-1], sv[0])
	}
	var u, v, g mat.Dense
	svd.UTo(&u)
	svd.VTo(&v)
	g.Mul(u.T(), yw) // dim×dim
	a := Identity()
	for i := range dim { // target axis
		for j := range dim { // source axis
			s := 0.0
			for k := range dim {
				s += v.At(j, k) / sv[k] * g.At(k, i)
			}
			a[i][j] = s
		}
	}
	mx, my := p.cx.Add(mo.mx), p.cy.Add(mo.my)
	mirrored := a.Det() < 0
	l := &Linear{Model: Affine, D: dim, A: a, T: my.Sub(a.MulVec(mx)), Mirrored: mirrored}
	res := &Result{Transform: l, Residuals: make([]Vec, n), Mirrored: mirrored}
	for i := range n {
		res.Residuals[i] = p.y[i].Sub(mo.my).Sub(a.MulVec(p.x[i].Sub(mo.mx)))
	}
	if !loo {
		return res, nil
	}
	res.LOO = make([]Vec, n)
	for i := range n {
		h := p.w[i]
		for k := range dim {
			h += u.At(i, k) * u.At(i, k)
		}
		if 1-h <= leverageTol {
			return nil, fmt.Errorf("leave-one-out of pair %d is undefined: it alone fixes a direction of the map (leverage %.12f); the other pairs lie on a %s", i, h, flatShape(dim))
		}
		res.LOO[i] = res.Residuals[i].Scale(1 / (1 - h))
	}
	return res, nil
}

// flatShape names the flat set that leaves an affine map undetermined.
func flatShape(dim int) string {
	if dim == 2 {
		return "line"
	}
	return "plane"
}

// forEach runs work(i) for i in [0, n) on all cores and returns the error of
// the lowest index that failed. Each call costs O(n) and about the same as
// every other, so the indices are split in even ranges, and already for a
// few dozen of them.
func forEach(n int, work func(i int) error) error {
	errs := make([]error, n)
	parallel.Ranges(n, 16, func(lo, hi int) {
		for i := lo; i < hi; i++ {
			errs[i] = work(i)
		}
	})
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}
