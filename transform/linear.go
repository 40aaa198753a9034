package transform

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"ferry/internal/errkind"
	"ferry/internal/parallel"
)

// Linear is the map p ↦ A·p + T: a translation, a rigid motion (a rotation,
// with a reflection where Mirrored), a similarity (a rigid motion and one
// scale) or a general affine map. In 2-D, A[2][2] is 1 and T[2] is 0, so the
// z coordinate passes through unchanged.
type Linear struct {
	Model Kind `json:"model"`
	D     int  `json:"dim"`
	// A is the linear part, dimensionless for every model but the affine
	// one, where it may also stretch and shear.
	A Mat `json:"matrix"`
	// T is the offset in micrometres.
	T Vec `json:"offset"`
	// Scale is the factor of a similarity, 1 for a translation or a rigid
	// motion and absent (zero) for an affine map, which has no single scale.
	Scale float64 `json:"scale,omitempty"`
	// Mirrored reports that A reverses handedness (det A < 0).
	Mirrored bool `json:"mirrored"`
}

// Kind names the model.
func (l *Linear) Kind() Kind { return l.Model }

// Dim is 2 or 3.
func (l *Linear) Dim() int { return l.D }

// Apply returns A·p + T.
func (l *Linear) Apply(p Vec) Vec { return l.A.MulVec(p).Add(l.T) }

// Jacobian is A everywhere.
func (l *Linear) Jacobian(Vec) Mat { return l.A }

// Invert returns A⁻¹·(q − T), or an error when A is singular.
func (l *Linear) Invert(q Vec) (Vec, error) {
	inv, ok := l.A.Inverse()
	if !ok {
		return Vec{}, errkind.New(ErrSingular, "%s transform has a singular matrix and cannot be inverted", l.Model)
	}
	return inv.MulVec(q.Sub(l.T)), nil
}

// Tolerances of the linear fits. Each is relative to the size or the spread
// of the points, never absolute, so that coordinates of 1e5 µm (EM voxels
// times their size) are judged like coordinates near the origin.
const (
	// coincideTol: points whose RMS distance from their centroid is below
	// this fraction of the centroid's distance from the origin cannot be
	// told apart in float64 after centring.
	coincideTol = 1e-9
	// flatTol: a point cloud whose RMS extent along its thinnest direction
	// is below this fraction of that along its widest is a line or a plane.
	// 1e-6 of a millimetre is a nanometre, far below any landmark's
	// localisation error, so no real landmark set is refused by it.
	flatTol = 1e-6
	// leverageTol: a pair whose affine leverage is within this of 1 alone
	// fixes a direction of the fit, and its leave-one-out prediction is
	// undefined.
	leverageTol = 1e-9
	// orthoTol bounds |AᵀA/s² − I| for a decoded rigid or similarity matrix.
	orthoTol = 1e-9
)

// validate checks a decoded Linear: a known model, 2 or 3 dimensions, finite
// numbers, the 2-D shape (z passes through), an invertible matrix whose
// handedness agrees with Mirrored, and the structure the model implies (the
// identity for a translation, a scaled orthogonal matrix for a rigid motion
// or a similarity).
func (l *Linear) validate() error {
	if l == nil {
		return errors.New("linear transform is missing")
	}
	switch l.Model {
	case Translation, Rigid, Similarity, Affine:
	default:
		return fmt.Errorf("linear transform has model %q (want translation, rigid, similarity or affine)", l.Model)
	}
	if l.D != 2 && l.D != 3 {
		return fmt.Errorf("%s transform has dimension %d: want 2 or 3", l.Model, l.D)
	}
	for i := range 3 {
		for j := range 3 {
			if !finite(l.A[i][j]) {
				return fmt.Errorf("%s transform: matrix entry (%d,%d) is %v", l.Model, i, j, l.A[i][j])
			}
		}
	}
	if !l.T.IsFinite() {
		return fmt.Errorf("%s transform: offset %v µm is not finite", l.Model, l.T)
	}
	if !finite(l.Scale) {
		return fmt.Errorf("%s transform: scale is %v", l.Model, l.Scale)
	}
	if l.D == 2 && (l.A[0][2] != 0 || l.A[1][2] != 0 || l.A[2][0] != 0 || l.A[2][1] != 0 || l.A[2][2] != 1 || l.T[2] != 0) {
		return fmt.Errorf("2-D %s transform must leave z alone: want matrix row and column 3 of the identity and offset z 0", l.Model)
	}
	if _, ok := l.A.Inverse(); !ok {
		return fmt.Errorf("%s transform has a singular matrix", l.Model)
	}
	if det := l.A.Det(); (det < 0) != l.Mirrored {
		return fmt.Errorf("%s transform: mirrored is %t but the matrix determinant is %g", l.Model, l.Mirrored, det)
	}
	switch l.Model {
	case Translation:
		if l.Scale != 0 && l.Scale != 1 {
			return fmt.Errorf("translation has scale %g: want 1", l.Scale)
		}
		if d := maxAbsDiff(l.A, Identity()); d > orthoTol {
			return fmt.Errorf("translation matrix differs from the identity by %g", d)
		}
	case Rigid:
		if l.Scale != 0 && math.Abs(l.Scale-1) > orthoTol {
			return fmt.Errorf("rigid transform has scale %g: want 1", l.Scale)
		}
		if d := maxAbsDiff(l.A.T().Mul(l.A), Identity()); d > orthoTol {
			return fmt.Errorf("rigid transform matrix is not orthogonal (|AᵀA − I| = %g)", d)
		}
	case Similarity:
		if !(l.Scale > 0) {
			return fmt.Errorf("similarity has scale %g: want a positive number", l.Scale)
		}
		s2 := l.Scale * l.Scale
		g := l.A.T().Mul(l.A)
		for i := range l.D {
			for j := range l.D {
				g[i][j] /= s2
			}
		}
		if d := maxAbsDiff(g, Identity()); d > orthoTol {
			return fmt.Errorf("similarity matrix is not %g times an orthogonal matrix (|AᵀA/s² − I| = %g)", l.Scale, d)
		}
	case Affine:
		if l.Scale != 0 {
			return fmt.Errorf("affine transform has scale %g: an affine map has no single scale", l.Scale)
		}
	}
	return nil
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func maxAbsDiff(a, b Mat) float64 {
	d := 0.0
	for i := range 3 {
		for j := range 3 {
			d = math.Max(d, math.Abs(a[i][j]-b[i][j]))
		}
	}
	return d
}

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

// handedness of an orthogonal fit: free to take a mirror, or held to one.
const (
	anyHand    = 0
	properHand = 1
	mirrorHand = -1
)

// fitOrthogonal fits a rigid motion or a similarity in closed form: the
// weighted least-squares solution of Umeyama (1991, IEEE Trans. Pattern
// Anal. Mach. Intell. 13(4):376–380), equivalent to Horn's (1987, J. Opt.
// Soc. Am. A 4(4):629–642). With SVD Σxy = U D Vᵀ of the cross-covariance,
// the rotation is R = U S Vᵀ, the scale c = tr(D S)/σx² and the offset
// t = μy − c R μx. S = I gives the best orthogonal matrix, which is a mirror
// where det(U)·det(V) = −1; S = diag(1, …, −1) then gives Umeyama's best
// proper rotation.
func (p *pairs) fitOrthogonal(kind Kind, noMirror, loo bool) (*Result, error) {
	mo := p.moments(-1)
	hand := anyHand
	if noMirror {
		hand = properHand
	}
	magX, magY := p.cx.Norm(), p.cy.Norm()
	r, c, err := solveOrthogonal(kind, p.dim, &mo, magX, magY, hand)
	if err != nil {
		return nil, err
	}
	a := scaled(r, c, p.dim)
	mirrored := r.Det() < 0
	mx, my := p.cx.Add(mo.mx), p.cy.Add(mo.my)
	l := &Linear{Model: kind, D: p.dim, A: a, T: my.Sub(a.MulVec(mx)), Scale: c, Mirrored: mirrored}
	res := &Result{Transform: l, Residuals: make([]Vec, len(p.x)), Mirrored: mirrored}
	for i := range p.x {
		res.Residuals[i] = p.y[i].Sub(mo.my).Sub(a.MulVec(p.x[i].Sub(mo.mx)))
	}
	if !loo {
		return res, nil
	}
	// No hat-matrix identity holds for an orthogonal fit, so each pair is
	// predicted by an exact refit of the others. The refit keeps the
	// handedness of the full fit: one left-out point must not flip it.
	hand = properHand
	if mirrored {
		hand = mirrorHand
	}
	res.LOO = make([]Vec, len(p.x))
	err = forEach(len(p.x), func(i int) error {
		mi := p.moments(i)
		ri, ci, err := solveOrthogonal(kind, p.dim, &mi, magX+mi.mx.Norm(), magY+mi.my.Norm(), hand)
		if err != nil {
			return fmt.Errorf("leave-one-out without pair %d: %w", i, err)
		}
		ai := scaled(ri, ci, p.dim)
		res.LOO[i] = p.y[i].Sub(mi.my).Sub(ai.MulVec(p.x[i].Sub(mi.mx)))
		return nil
	})
	if err != nil {
		return nil, err
	}
	return res, nil
}

// scaled is c·r with the 2-D z row and column left as the identity.
func scaled(r Mat, c float64, dim int) Mat {
	a := Identity()
	for i := range dim {
		for j := range dim {
			a[i][j] = c * r[i][j]
		}
	}
	return a
}

// solveOrthogonal returns the rotation (or mirror) R and the scale c (1 for
// a rigid motion) of the weighted Umeyama solution for the moments mo. magX
// and magY are the distances of the source and target centroids from the
// origin, against which a spread is judged too small to resolve.
func solveOrthogonal(kind Kind, dim int, mo *moments, magX, magY float64, hand int) (Mat, float64, error) {
	varX, varY := trace(mo.cxx), trace(mo.cyy)
	sx, sy := math.Sqrt(varX), math.Sqrt(varY)
	if sx <= coincideTol*(magX+sx) {
		return Mat{}, 0, fmt.Errorf("all source points coincide (RMS spread %.3g µm): the rotation is undetermined", sx)
	}
	if sy <= coincideTol*(magY+sy) {
		return Mat{}, 0, fmt.Errorf("all target points coincide (RMS spread %.3g µm): the rotation is undetermined", sy)
	}
	ex, ey := extents(mo.cxx, dim), extents(mo.cyy, dim)
	if dim == 3 {
		if ex[1] <= flatTol*ex[0] {
			return Mat{}, 0, fmt.Errorf("source points lie on a line (RMS extents %.3g and %.3g µm across it): the rotation about it is undetermined", ex[1], ex[2])
		}
		if ey[1] <= flatTol*ey[0] {
			return Mat{}, 0, fmt.Errorf("target points lie on a line (RMS extents %.3g and %.3g µm across it): the rotation about it is undetermined", ey[1], ey[2])
		}
	}
	var svd mat.SVD
	if !svd.Factorize(dense(mo.cxy, dim), mat.SVDFull) {
		return Mat{}, 0, errors.New("singular value decomposition of the cross-covariance failed")
	}
	d := svd.Values(nil)
	var u, v mat.Dense
	svd.UTo(&u)
	svd.VTo(&v)
	// Singular values of Σxy are products of extents; 1e-12 of sx·sy is the
	// square of flatTol.
	rankTol := flatTol * flatTol * sx * sy
	if d[dim-2] <= rankTol {
		return Mat{}, 0, fmt.Errorf("the pairs do not determine the rotation: the source–target cross-covariance has rank below %d", dim-1)
	}
	sign := math.Copysign(1, mat.Det(&u)*mat.Det(&v))
	last := 1.0 // S = I: the best orthogonal matrix, mirror or not
	switch {
	case hand == properHand:
		last = sign
	case hand == mirrorHand:
		last = -sign
	case d[dim-1] <= rankTol || ex[dim-1] <= flatTol*ex[0] || ey[dim-1] <= flatTol*ey[0]:
		// Points on a plane (a line in 2-D), on either side, fit a
		// rotation and its mirror through that plane equally well:
		// nothing calls for a mirror. The flatness is judged on the
		// points themselves, since rounding at 1e5 µm puts noise into Σxy.
		last = sign
	}
	var r Mat
	if dim == 2 {
		r[2][2] = 1
	}
	for i := range dim {
		for j := range dim {
			for k := range dim {
				s := 1.0
				if k == dim-1 {
					s = last
				}
				r[i][j] += u.At(i, k) * s * v.At(j, k)
			}
		}
	}
	if kind == Rigid {
		return r, 1, nil
	}
	trDS := 0.0
	for k := range dim {
		if k == dim-1 {
			trDS += last * d[k]
		} else {
			trDS += d[k]
		}
	}
	if trDS <= rankTol {
		return Mat{}, 0, fmt.Errorf("the similarity scale with this handedness would be %.3g: no map of that handedness fits the pairs", trDS/varX)
	}
	return r, trDS / varX, nil
}

func trace(m Mat) float64 { return m[0][0] + m[1][1] + m[2][2] }

// dense copies the leading dim×dim block of m.
func dense(m Mat, dim int) *mat.Dense {
	d := mat.NewDense(dim, dim, nil)
	for i := range dim {
		for j := range dim {
			d.Set(i, j, m[i][j])
		}
	}
	return d
}

// extents are the RMS extents of a point cloud along its principal axes,
// widest first, from its covariance c: the square roots of its eigenvalues.
func extents(c Mat, dim int) [3]float64 {
	var svd mat.SVD
	var e [3]float64
	if !svd.Factorize(dense(c, dim), mat.SVDNone) {
		return e // all zero: reported as degenerate by the caller
	}
	for i, v := range svd.Values(nil) {
		e[i] = math.Sqrt(math.Max(v, 0))
	}
	return e
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
