package transform

// The covariance between the errors of a linear fit's predictions at two
// points, to first order in the noise: with the notation of
// linear_predict.go, the prediction at p moves by G(p)·δθ and δθ has
// covariance s·N⁻¹, so
//
//	Cov(e(x), e(z)) = s·G(x) N⁻¹ G(z)ᵀ,
//
// the cross term of the target registration error analysis of Fitzpatrick,
// West and Maurer (1998, IEEE Trans. Med. Imaging 17(5):694–702). One more
// landmark at z of unit weight adds G(z)ᵀG(z) to N, and the inverse of the
// new normal matrix is the rank-dim update
//
//	(N + GᵀG)⁻¹ = N⁻¹ − N⁻¹Gᵀ (I + G N⁻¹ Gᵀ)⁻¹ G N⁻¹,  G = G(z)
//
// (Sherman and Morrison 1950, Ann. Math. Stat. 21(1):124–127, for rank one;
// Woodbury's 1950 report for the block form, both cited from memory), which
// is the conditioning formula of CrossPredictor with ν = 1: what a new
// landmark does to the predictions anywhere follows from CrossFactor alone.
// For a translation and an affine map the parameters of the three axes
// separate and the update is rank one on each; for a rigid motion or a
// similarity it is the linearised update about the current fit, exact for
// a landmark whose target is where the fit predicts it and to first order
// otherwise.

var _ CrossPredictor = (*LinearPredictor)(nil)

// centred is p − c with the 2-D z place left at zero.
func (lp *LinearPredictor) centred(p Vec) Vec {
	x := p.Sub(lp.centre)
	if lp.dim == 2 {
		x[2] = 0
	}
	return x
}

// CrossFactor is G(x) N⁻¹ G(z)ᵀ: s·CrossFactor(x, z) is the covariance
// (µm²) between the errors of the predicted target positions at x and at z
// for target errors of variance s/w_i on every axis, and
// CrossFactor(x, x) = Factor(x). For a translation it is I/N, for an affine
// map (1/N + (x−c)ᵀ(Σ w (p−c)(p−c)ᵀ)⁻¹(z−c))·I, and for a rigid motion or
// a similarity a full matrix, not symmetric unless x = z.
func (lp *LinearPredictor) CrossFactor(x, z Vec) Mat {
	var f Mat
	switch lp.model {
	case Translation, Affine:
		c := lp.crossScalar(lp.whiten(x), lp.whiten(z))
		for k := range lp.dim {
			f[k][k] = c
		}
		return f
	}
	qx, qz := lp.a.MulVec(lp.centred(x)), lp.a.MulVec(lp.centred(z))
	if lp.dim == 2 {
		qx[2], qz[2] = 0, 0
	}
	gx, gz := lp.design(qx), lp.design(qz)
	ninv := lp.normalInverse()
	np := lp.params()
	var gn [3][maxParams]float64
	for k := range lp.dim {
		for c := range np {
			s := 0.0
			for r := range np {
				s += gx[k][r] * ninv[r][c]
			}
			gn[k][c] = s
		}
	}
	for k := range lp.dim {
		for l := range lp.dim {
			s := 0.0
			for c := range np {
				s += gn[k][c] * gz[l][c]
			}
			f[k][l] = s
		}
	}
	return f
}

// whiten is axes·(p − c) for an affine map, whose dot products give the
// position part of the factor; zero for a translation.
func (lp *LinearPredictor) whiten(p Vec) Vec {
	if lp.model != Affine {
		return Vec{}
	}
	return lp.axes.MulVec(lp.centred(p))
}

// crossScalar is the multiple of I in CrossFactor for a translation or an
// affine map, from whitened positions.
func (lp *LinearPredictor) crossScalar(ax, az Vec) float64 {
	return lp.invWeight + ax.Dot(az)
}

// scalarLinear is the ScalarCrossPredictor of a translation or an affine
// map (AsScalar).
type scalarLinear struct{ *LinearPredictor }

// VarianceAll sets dst[i] to the multiple of I in Factor(xs[i]).
func (s scalarLinear) VarianceAll(xs []Vec, dst []float64) {
	if len(dst) != len(xs) {
		panic("transform: VarianceAll with dst of the wrong length")
	}
	for i, x := range xs {
		a := s.whiten(x)
		dst[i] = s.crossScalar(a, a)
	}
}

// CrossAll sets dst[i·len(zs)+j] to the multiple of I in
// CrossFactor(xs[i], zs[j]), on all cores.
func (s scalarLinear) CrossAll(xs, zs []Vec, dst []float64) {
	if len(dst) != len(xs)*len(zs) {
		panic("transform: CrossAll with dst of the wrong length")
	}
	az := make([]Vec, len(zs))
	for j, z := range zs {
		az[j] = s.whiten(z)
	}
	parallelRows(len(xs), func(lo, hi int) {
		for i := lo; i < hi; i++ {
			a := s.whiten(xs[i])
			row := dst[i*len(zs) : (i+1)*len(zs)]
			for j := range row {
				row[j] = s.crossScalar(a, az[j])
			}
		}
	})
}
