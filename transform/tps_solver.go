package transform

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
	"gonum.org/v1/gonum/mat"

	"ferry/internal/parallel"
)

// The spline's solver. The affine part's QR is hand-written rather than
// taken from gonum because its at most four reflectors are applied one by
// one: from both sides of the symmetric kernel matrix (projectSym), to
// column blocks (reflectColumns) and to single rows (reflectRows). gonum's
// mat.QR gives Q only as a whole matrix, an O(N³) product to apply, and
// lapack64.Ormqr applies the packed reflectors to one side of a general
// matrix at a time; the loops here do the two-sided update directly, in
// O(N²·m). The projected block is factorised by gonum's mat.Cholesky
// (newSplineSystem) and solved with it (solve).

// householderColumns computes the Householder QR of the N×m matrix whose
// columns are cols (overwritten): the reflectors v_k (zero above row k, one
// at row k) with their τ_k, and R (m×m, upper triangular).
func householderColumns(cols [][]float64) (v [][]float64, tau []float64, r [][]float64) {
	m, N := len(cols), len(cols[0])
	v = make([][]float64, m)
	tau = make([]float64, m)
	r = make([][]float64, m)
	for k := range m {
		r[k] = make([]float64, m)
		x := cols[k]
		norm := 0.0
		for i := k; i < N; i++ {
			norm += x[i] * x[i]
		}
		norm = math.Sqrt(norm)
		vk := make([]float64, N)
		vk[k] = 1
		beta := x[k]
		if norm > 0 {
			// LAPACK's dlarfg convention: β = −sign(x_k)|x|.
			beta = -math.Copysign(norm, x[k])
			tau[k] = (beta - x[k]) / beta
			inv := 1 / (x[k] - beta)
			for i := k + 1; i < N; i++ {
				vk[i] = x[i] * inv
			}
		}
		v[k] = vk
		r[k][k] = beta
		for j := k + 1; j < m; j++ {
			applyReflector(cols[j], vk, tau[k], k)
			r[k][j] = cols[j][k]
		}
	}
	return v, tau, r
}

// applyReflector overwrites x with (I − τ v vᵀ) x, v being zero above row k.
func applyReflector(x, v []float64, tau float64, k int) {
	if tau == 0 {
		return
	}
	x, v = x[k:], v[k:len(x)]
	d := 0.0
	for i, vi := range v {
		d += vi * x[i]
	}
	d *= tau
	for i, vi := range v {
		x[i] -= d * vi
	}
}

// project overwrites the symmetric N×N matrix a with Qᵀ a Q, one reflector
// at a time from both sides: with p = τ a v and w = p − (τ/2)(pᵀv) v,
// H a H = a − v wᵀ − w vᵀ, which costs 4N² per reflector.
func (sys *splineSystem) project(a []float64) {
	projectSym(a, len(sys.nodes), sys.v, sys.tau)
}

// projectSym overwrites the symmetric N×N matrix a with Qᵀ a Q for Q the
// product of the reflectors v, tau (householderColumns), as project.
func projectSym(a []float64, N int, vs [][]float64, taus []float64) {
	p := make([]float64, N)
	for k := range vs {
		v, tau := vs[k], taus[k]
		if tau == 0 {
			continue
		}
		vk := v[k:]
		parallelRows(N, func(lo, hi int) {
			for i := lo; i < hi; i++ {
				row := a[i*N+k : i*N+N]
				s := 0.0
				for j, vj := range vk {
					s += row[j] * vj
				}
				p[i] = tau * s
			}
		})
		half := 0.0
		for i := k; i < N; i++ {
			half += p[i] * v[i]
		}
		half *= tau / 2
		for i := range N {
			p[i] -= half * v[i] // p is now w
		}
		parallelRows(N, func(lo, hi int) {
			for i := lo; i < hi; i++ {
				row := a[i*N : i*N+N]
				vi, wi := v[i], p[i]
				// Row i changes by −v_i wᵀ − w_i vᵀ; v vanishes above k.
				if vi != 0 {
					for j := range row {
						row[j] -= vi * p[j]
					}
				}
				rk := row[k:]
				for j, vj := range vk {
					rk[j] -= wi * vj
				}
			}
		})
	}
}

// applyQT overwrites x (N×k) with Qᵀx.
func (sys *splineSystem) applyQT(x *mat.Dense) {
	for k := range sys.m {
		sys.reflectRows(x, k)
	}
}

// applyQ overwrites x (N×k) with Qx.
func (sys *splineSystem) applyQ(x *mat.Dense) {
	for k := sys.m - 1; k >= 0; k-- {
		sys.reflectRows(x, k)
	}
}

// reflectRows overwrites x with H_k x.
func (sys *splineSystem) reflectRows(x *mat.Dense, k int) {
	raw := x.RawMatrix()
	reflectColumns(raw.Data, raw.Stride, raw.Rows, 0, raw.Cols, sys.v[k], sys.tau[k], k)
}

// reflectColumns overwrites columns [c0, c1) of the row-major matrix data
// (rows×stride) with H x for H = I − τ v vᵀ, v being zero above row k.
func reflectColumns(data []float64, stride, rows, c0, c1 int, v []float64, tau float64, k int) {
	if tau == 0 || c1 <= c0 {
		return
	}
	t := make([]float64, c1-c0)
	for i := k; i < rows; i++ {
		if vi := v[i]; vi != 0 {
			row := data[i*stride+c0 : i*stride+c1]
			for j, x := range row {
				t[j] += vi * x
			}
		}
	}
	for j := range t {
		t[j] *= tau
	}
	for i := k; i < rows; i++ {
		if vi := v[i]; vi != 0 {
			row := data[i*stride+c0 : i*stride+c1]
			for j := range row {
				row[j] -= vi * t[j]
			}
		}
	}
}

// solve returns the solution [c; a] of M [c; a] = [f; g] for f (N×k) and g
// (m×k; nil for zero), following the block elimination in the comment on
// splineSystem. The fit calls it with g = 0, which makes α = 0.
func (sys *splineSystem) solve(f, g *mat.Dense) (c, a *mat.Dense) {
	N, m := len(sys.nodes), sys.m
	n := N - m
	_, k := f.Dims()
	t := mat.DenseCopyOf(f)
	sys.applyQT(t)
	alpha := mat.NewDense(m, k, nil)
	if g != nil {
		// Rᵀ α = g by forward substitution.
		for col := range k {
			for i := range m {
				s := g.At(i, col)
				for l := range i {
					s -= sys.r[l][i] * alpha.At(l, col)
				}
				alpha.Set(i, col, s/sys.r[i][i])
			}
		}
	}
	gamma := mat.NewDense(max(n, 1), k, nil)
	if n > 0 {
		rhs := mat.DenseCopyOf(t.Slice(m, N, 0, k))
		if g != nil {
			var ba mat.Dense
			ba.Mul(sys.b12.T(), alpha)
			rhs.Sub(rhs, &ba)
		}
		// The factor passed the condition check, so SolveTo's
		// condition warning cannot arise; the result is used either way.
		_ = sys.chol.SolveTo(gamma, rhs)
	}
	a = mat.NewDense(m, k, nil)
	for col := range k {
		rhs := make([]float64, m)
		for i := range m {
			s := t.At(i, col)
			for l := range m {
				s -= sys.b11[i][l] * alpha.At(l, col)
			}
			if n > 0 {
				for l := range n {
					s -= sys.b12.At(i, l) * gamma.At(l, col)
				}
			}
			rhs[i] = s
		}
		// R a = rhs by back substitution.
		for i := m - 1; i >= 0; i-- {
			s := rhs[i]
			for l := i + 1; l < m; l++ {
				s -= sys.r[i][l] * a.At(l, col)
			}
			a.Set(i, col, s/sys.r[i][i])
		}
	}
	c = mat.NewDense(N, k, nil)
	for i := range m {
		for col := range k {
			c.Set(i, col, alpha.At(i, col))
		}
	}
	for i := range n {
		for col := range k {
			c.Set(m+i, col, gamma.At(i, col))
		}
	}
	sys.applyQ(c)
	return c, a
}

// leverage returns the diagonal of Y Yᵀ = P (PᵀP)⁻¹ Pᵀ, the affine leverage
// of each node.
func (sys *splineSystem) leverage() []float64 {
	N, m := len(sys.nodes), sys.m
	y := mat.NewDense(N, m, nil)
	for i := range m {
		y.Set(i, i, 1)
	}
	sys.applyQ(y)
	h := make([]float64, N)
	for i := range N {
		row := y.RawRowView(i)
		for _, x := range row {
			h[i] += x * x
		}
	}
	return h
}

// inverseDiagonal returns the diagonal of Z C⁻¹ Zᵀ, the top-left block of
// M⁻¹. With C = UᵀU, Z C⁻¹ Zᵀ = G Gᵀ for G = Z U⁻¹ = Q [0; U⁻¹], so the
// diagonal holds the squared row norms of G. U⁻¹ is formed in place (LAPACK
// dtrtri, n³/3 flops, the only cubic cost after the factorisation) inside
// the N×n buffer for G, and Q is applied to column blocks of G on all cores.
func (sys *splineSystem) inverseDiagonal() ([]float64, error) {
	N, m := len(sys.nodes), sys.m
	n := N - m
	if n == 0 {
		return nil, errors.New("thin-plate spline has no kernel freedom: leave-one-out needs more pairs than the affine part")
	}
	u := sys.chol.RawU().(mat.RawTriangular).RawTriangular()
	g := make([]float64, N*n)
	for i := range n {
		copy(g[(m+i)*n+i:(m+i+1)*n], u.Data[i*u.Stride+i:i*u.Stride+n])
	}
	if !invertUpper(blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: n, Stride: n, Data: g[m*n:]}) {
		return nil, errors.New("thin-plate spline leave-one-out: the Cholesky factor is singular")
	}
	// The squared row norms are summed over fixed blocks of columns and
	// the blocks' sums added in block order, so that the diagonal is the
	// same to the last bit whatever the number of cores: with a block per
	// core, one core and two added the columns in different groups.
	const block = 64
	nb := (n + block - 1) / block
	parts := make([]float64, nb*N)
	parallel.Ranges(nb, 1, func(b0, b1 int) {
		for b := b0; b < b1; b++ {
			c0, c1 := b*block, min((b+1)*block, n)
			for k := m - 1; k >= 0; k-- {
				reflectColumns(g, n, N, c0, c1, sys.v[k], sys.tau[k], k)
			}
			part := parts[b*N : (b+1)*N]
			for i := range N {
				s := 0.0
				for _, x := range g[i*n+c0 : i*n+c1] {
					s += x * x
				}
				part[i] = s
			}
		}
	})
	diag := make([]float64, N)
	for b := range nb {
		for i, s := range parts[b*N : (b+1)*N] {
			diag[i] += s
		}
	}
	return diag, nil
}

// invertUpper overwrites the upper triangular t with its inverse. LAPACK's
// blocked dtrtri runs on one core; here the columns are split in two at
// k = n·2^(−1/3), which halves the n³/3 flops between two cores: with
// U = [U11 U12; 0 U22], the leading k columns of U⁻¹ are U11⁻¹ (dtrtri on
// the leading block) and the trailing columns [X; U22⁻¹] solve the
// triangular systems U22 Y = I, U11 X = −U12 Y (dtrtri on U22 followed by
// two matrix products), costing k³/3 and (n³ − k³)/3 flops respectively.
func invertUpper(t blas64.Triangular) bool {
	n := t.N
	// The split depends on n alone, not on the cores there are, so that
	// the inverse is the same to the last bit on one core and on many; on
	// one core it costs the same flops as dtrtri.
	if n < 256 {
		return lapack64.Trtri(t)
	}
	k := int(float64(n) * math.Pow(2, -1.0/3))
	st := t.Stride
	u11 := blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: k, Stride: st, Data: t.Data}
	u22 := blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: n - k, Stride: st, Data: t.Data[k*st+k:]}
	// U11 is needed intact by the trailing block, so that block works on
	// a copy of it while the leading block is inverted in place.
	c11 := make([]float64, k*k)
	for i := range k {
		copy(c11[i*k+i:(i+1)*k], t.Data[i*st+i:i*st+k])
	}
	// The two blocks write disjoint parts of t, so they run side by side
	// as two tasks of one pool, or one after the other on one core.
	var ok1, ok2 bool
	parallel.Ranges(2, 1, func(lo, hi int) {
		for task := lo; task < hi; task++ {
			if task == 0 {
				ok1 = lapack64.Trtri(u11)
				continue
			}
			ok2 = lapack64.Trtri(u22)
			if ok2 {
				// X = −U11⁻¹ U12 U22⁻¹: first U12 ← U12·U22⁻¹, then
				// solve U11 X = −U12.
				u12 := blas64.General{Rows: k, Cols: n - k, Stride: st, Data: t.Data[k:]}
				blas64.Trmm(blas.Right, blas.NoTrans, 1, u22, u12)
				c := blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: k, Stride: k, Data: c11}
				blas64.Trsm(blas.Left, blas.NoTrans, -1, c, u12)
			}
		}
	})
	return ok1 && ok2
}

// leaveOneOut returns the exact leave-one-out errors of the fit whose
// kernel weights are w, without refitting.
//
// The identity is Rippa's (1999, Adv. Comput. Math. 11:193–210), extended
// here to the affine part and to S > 0. Let x = [c; a] solve M x = b with
// b = [q; 0], and for pair i let
//
//	x⁽ⁱ⁾ = x − (c_i / (M⁻¹)_ii) · M⁻¹ e_i.
//
// Its i-th entry is c_i − c_i = 0, and M x⁽ⁱ⁾ = b − (c_i/(M⁻¹)_ii) e_i, so
// every row but the i-th holds exactly; deleting row and column i (the
// column multiplies the zero entry) leaves the system of the fit without
// pair i, and x⁽ⁱ⁾ without its i-th entry is that fit. Row i reads
// Σ_{j≠i} K_ij c⁽ⁱ⁾_j + P_i a⁽ⁱ⁾ + S·D_ii·c⁽ⁱ⁾_i = q_i − c_i/(M⁻¹)_ii, and
// its first two terms are the prediction f⁽⁻ⁱ⁾(p_i) of the reduced fit while
// the smoothing term vanishes because c⁽ⁱ⁾_i = 0 — the smoothing sits only
// on the removed diagonal, which is why the identity survives S > 0. Hence
//
//	e_i = q_i − f⁽⁻ⁱ⁾(p_i) = c_i / (M⁻¹)_ii,  (M⁻¹)_ii = (Z C⁻¹ Zᵀ)_ii.
//
// Both sides are properties of the fitted functions, so the normalised
// system gives the micrometre answer. With pair weights the reduced fit
// keeps each remaining pair's smoothing S·w̄/w_j, w̄ the mean over all N
// pairs: leaving a pair out does not renormalise the others.
//
// The second result is Result.LOOFactor, 1/(M⁻¹)_ii of the contract's
// micrometre system. Its top-left block of M⁻¹ is that of the normalised
// system divided by s in 3-D and by s² in 2-D (in 2-D the extra r² term of
// the kernel vanishes on the projection: Zᵀ R Z = 0 because Zᵀ1 = 0 and
// ZᵀU = 0).
//
// A pair whose affine leverage is 1 alone fixes a direction of the affine
// part (the others lie on a line or a plane); its (M⁻¹)_ii is 0 and its
// leave-one-out error undefined, which is an error.
func (sys *splineSystem) leaveOneOut(w []Vec) (loo []Vec, factor []float64, err error) {
	if err := sys.checkLeverage(); err != nil {
		return nil, nil, err
	}
	return sys.looFromDiagonal(w)
}

// checkLeverage refuses a system in which a pair's affine leverage is 1,
// whose leave-one-out is then undefined.
func (sys *splineSystem) checkLeverage() error {
	for i, h := range sys.leverage() {
		if 1-h <= leverageTol {
			return fmt.Errorf("leave-one-out of pair %d is undefined: it alone fixes a direction of the spline's affine part (leverage %.12f); the other pairs lie on a %s", i, h, flatShape(sys.dim))
		}
	}
	return nil
}

// looFromDiagonal is leaveOneOut after the leverage check.
func (sys *splineSystem) looFromDiagonal(w []Vec) (loo []Vec, factor []float64, err error) {
	d, err := sys.inverseDiagonal()
	if err != nil {
		return nil, nil, err
	}
	unit := sys.scale // (M_µm⁻¹)_ii = (M_u⁻¹)_ii / unit
	if sys.dim == 2 {
		unit *= sys.scale
	}
	loo, factor = make([]Vec, len(w)), make([]float64, len(w))
	for i, di := range d {
		if !(di > 0) {
			return nil, nil, fmt.Errorf("leave-one-out of pair %d: the inverse of the spline system has diagonal %g, not positive; the system is too ill-conditioned", i, di)
		}
		loo[i] = w[i].Scale(1 / di)
		factor[i] = unit / di
	}
	return loo, factor, nil
}

// parallelRows runs work over [0, n) on all cores for work of O(n) or more
// per index.
func parallelRows(n int, work func(lo, hi int)) { parallel.Ranges(n, 64, work) }
