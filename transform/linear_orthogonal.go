package transform

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

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
