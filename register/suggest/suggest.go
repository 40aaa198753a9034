package suggest

import (
	"errors"
	"ferry/progress"
	"fmt"
	"math"
	"sort"

	"ferry/register"
	"ferry/transform"
)

// DefaultN is the number of landmarks suggested when Options.N is zero.
const DefaultN = 5

const (
	// maxPairs bounds the cell–candidate covariances the spline's search
	// holds (eight bytes each, 128 MiB); beyond it the search evaluates
	// every k-th cell only.
	maxPairs = 1 << 24
	// minSearchCells is the fewest cells a strided search may look at.
	minSearchCells = 200
)

// Options steer Suggest.
type Options struct {
	// N is how many landmarks to suggest; 0 means DefaultN.
	N int
	// Candidates are the source positions (µm) to choose from. Nil means
	// the default grid over the box of the landmarks and the cells (Grid
	// with GridTarget nodes, BlockGridTarget for a rigid motion or a
	// similarity).
	Candidates []transform.Vec
	// CellSD, when not nil, is the cells' own localisation error (µm per
	// axis, one standard deviation), as for `ferry map --cell-sd`.
	CellSD *transform.Vec
	// Progress, when not nil, hears of each landmark chosen: each one
	// weighs every candidate location against the cells.
	Progress progress.Reporter
}

// Suggestion is one suggested landmark.
type Suggestion struct {
	// Rank is 1 for the first choice.
	Rank int
	// Candidate is the index of the location in Result.Candidates.
	Candidate int
	// Source is the location (µm) and Target the position the current
	// fit predicts for it (µm).
	Source, Target transform.Vec
	// TargetSD (µm per axis) and TargetR95 (µm) are the uncertainty of
	// Target as the place of a new landmark's target: the predictive
	// covariance of the current fit there, picking noise included.
	TargetSD  transform.Vec
	TargetR95 float64
	// Status is the map status of the location (status.OK,
	// status.Extrapolated, …).
	Status string
	// R95After is the median r95 (µm) of the cells once suggestions 1 to
	// Rank are added, and Gain (µm) how much this one lowered it.
	R95After, Gain float64
	// MeanR95After is the mean r95 (µm) of the cells at the same point.
	MeanR95After float64
}

// Result is the outcome of a search.
type Result struct {
	Dim int
	// Model is the transform's model and Smoothing its S, both kept fixed.
	Model     transform.Kind
	Smoothing float64
	// NoiseFactor is ν, the noise of a new landmark in units of the
	// per-axis scale.
	NoiseFactor float64
	// Candidates are the locations searched (µm) and GridSpacing the
	// spacing of the default grid (µm), 0 when they were given.
	Candidates  []transform.Vec
	GridSpacing float64
	// SearchCells is how many cells the greedy search evaluated: all of
	// them unless there were too many pairs with the candidates.
	SearchCells int
	// R95Before and MeanR95Before are the median and mean r95 (µm) of the
	// cells now.
	R95Before, MeanR95Before float64
	// CellR95Before and CellR95After are each cell's r95 (µm) now and once
	// all suggestions are added.
	CellR95Before, CellR95After []float64
	// Suggestions are in the order chosen; there are fewer than asked for
	// when the candidates ran out.
	Suggestions []Suggestion
}

// Suggest chooses where to pick the next landmarks for the registration f
// so that the median r95 of the cells (source positions in µm) shrinks
// most, greedily (see the package documentation). f must carry its
// uncertainty model, as fit makes it.
func Suggest(f *register.Registration, cells []transform.Vec, opt Options) (*Result, error) {
	if f == nil || f.Transform == nil {
		return nil, errors.New("no transform to suggest landmarks for")
	}
	dim := f.Transform.Dim()
	n := opt.N
	if n == 0 {
		n = DefaultN
	}
	if n < 0 {
		return nil, fmt.Errorf("%d landmarks asked for: want a positive number", n)
	}
	if len(cells) == 0 {
		return nil, errors.New("no cells: the suggestions are judged by the cells' uncertainty")
	}
	if err := checkPoints("cell", cells, dim); err != nil {
		return nil, err
	}
	// With the error model the search ranks by it and reports map's radii
	// after refitting; without, it conditions on the fitted model's own
	// kriging variance.
	if g, err := register.NewFieldGain(f); err == nil {
		return suggestField(f, g, cells, n, opt)
	}
	f, err := register.WithoutField(f)
	if err != nil {
		return nil, err
	}
	u := f.Uncertainty
	cp, err := transform.NewCrossPredictor(f.Transform, u.Source, u.Weights)
	if err != nil {
		return nil, fmt.Errorf("uncertainty model: %v", err)
	}
	mapper, err := register.NewMapper(f)
	if err != nil {
		return nil, err
	}
	res := &Result{Dim: dim, Model: f.Transform.Kind(), Smoothing: f.Smoothing, NoiseFactor: u.NoiseFactor}
	if opt.Candidates != nil {
		if err := checkPoints("candidate location", opt.Candidates, dim); err != nil {
			return nil, err
		}
		res.Candidates = opt.Candidates
	} else {
		target := GridTarget
		if _, scalar := transform.AsScalar(cp); !scalar {
			target = BlockGridTarget
		}
		lo, hi := Bounds(dim, u.Source, cells)
		res.Candidates, res.GridSpacing, err = Grid(dim, lo, hi, target)
		if err != nil {
			return nil, err
		}
	}
	if len(res.Candidates) == 0 {
		return nil, errors.New("no candidate locations to choose from")
	}
	if len(res.Candidates) > maxPairs/minSearchCells {
		return nil, fmt.Errorf("%d candidate locations are too many to search (at most %d)", len(res.Candidates), maxPairs/minSearchCells)
	}

	model := newCellModel(f.Transform, u, cells, opt.CellSD)
	// A suggestion's target is a new landmark's, with no cell error.
	targets := &cellModel{dim: dim, u: u, radii: model.radii}
	search := searchSubset(len(cells), len(res.Candidates), maxPairs)
	res.SearchCells = len(search)
	sub := make([]transform.Vec, len(search))
	for k, i := range search {
		sub[k] = cells[i]
	}
	var chosen []int
	rep := progress.Of(opt.Progress)
	rep.Step(fmt.Sprintf("choosing %d of %d locations for %d cells", n, len(res.Candidates), len(search)), n)
	if sp, ok := transform.AsScalar(cp); ok {
		s := newScalarSearch(sp, u.NoiseFactor, model.subset(search), sub, res.Candidates)
		chosen = s.run(n, rep)
	} else {
		s := newBlockSearch(cp, u.NoiseFactor, model.subset(search), sub, res.Candidates)
		chosen = s.run(n, rep)
	}
	rep.Finish()

	// The radii reported, exactly, over all cells.
	zs := make([]transform.Vec, len(chosen))
	for k, j := range chosen {
		zs[k] = res.Candidates[j]
	}
	radii := make([]float64, len(cells))
	conditionSequence(cp, u.NoiseFactor, dim, cells, zs, func(k int, factor func(i int) transform.Mat) {
		for i := range cells {
			radii[i] = model.radius(i, factor(i))
		}
		sug, ok := res.step(k, chosen, radii)
		if !ok {
			return
		}
		mapped := mapper.Map(sug.Source, nil)
		target := targets.covariance(0, cp.Factor(sug.Source))
		sug.Target, sug.Status, sug.TargetR95 = mapped.Pos, string(mapped.Status), targets.radii.Radius(target)
		for a := range dim {
			sug.TargetSD[a] = math.Sqrt(math.Max(target[a][a], 0))
		}
		res.Suggestions = append(res.Suggestions, sug)
	})
	res.CellR95After = radii
	return res, nil
}

func checkPoints(what string, ps []transform.Vec, dim int) error {
	for i, p := range ps {
		if !p.IsFinite() {
			return fmt.Errorf("%s %d has a coordinate that is not a finite number", what, i+1)
		}
		if dim == 2 && p[2] != 0 {
			return fmt.Errorf("%s %d has a z coordinate for a 2-D transform", what, i+1)
		}
	}
	return nil
}

// searchSubset lists the cells the greedy search evaluates: all of them,
// or every k-th when the cells and candidates make more than bound pairs.
func searchSubset(cells, candidates, bound int) []int {
	stride := 1
	if cells*candidates > bound {
		stride = (cells*candidates + bound - 1) / bound
		stride = min(stride, max(1, cells/minSearchCells))
	}
	var idx []int
	for i := 0; i < cells; i += stride {
		idx = append(idx, i)
	}
	return idx
}

// conditionSequence calls step(k, factor) for k = 0 … len(zs), where
// factor(i) is the factor at xs[i] once z₁ … z_k are added: the sequential
// conditioning of the package documentation, with the low-rank correction
// C − Σ_l U_l(x)U_l(z)ᵀ kept for the points of zs. factor is valid only
// during the call.
func conditionSequence(cp transform.CrossPredictor, nu float64, dim int, xs, zs []transform.Vec, step func(k int, factor func(i int) transform.Mat)) {
	if sp, ok := transform.AsScalar(cp); ok {
		conditionScalar(sp, nu, dim, xs, zs, step)
		return
	}
	K := len(zs)
	all := append(append([]transform.Vec(nil), zs...), xs...)
	f := make([]transform.Mat, len(all))
	for p, x := range all {
		f[p] = cp.Factor(x)
	}
	step(0, func(i int) transform.Mat { return f[K+i] })
	us := make([][]transform.Mat, K)
	for l, z := range zs {
		s, ok := invCholT(addNoise(f[l], nu, dim), dim)
		us[l] = make([]transform.Mat, len(all))
		if ok {
			for p, x := range all {
				// C_cur(p, z_l) = C(p, z_l) − Σ_{m<l} U_m(p) U_m(z_l)ᵀ.
				c := cp.CrossFactor(x, z)
				for m := range l {
					c = subMat(c, us[m][p].Mul(us[m][l].T()))
				}
				us[l][p] = c.Mul(s)
			}
			for p := range all {
				f[p] = clampFactor(subMat(f[p], us[l][p].Mul(us[l][p].T())), dim)
			}
		}
		step(l+1, func(i int) transform.Mat { return f[K+i] })
	}
}

// conditionScalar is conditionSequence for scalar factors, in scalars.
func conditionScalar(sp transform.ScalarCrossPredictor, nu float64, dim int, xs, zs []transform.Vec, step func(k int, factor func(i int) transform.Mat)) {
	K := len(zs)
	all := append(append([]transform.Vec(nil), zs...), xs...)
	N := len(all)
	f := make([]float64, N)
	sp.VarianceAll(all, f)
	at := func(i int) transform.Mat { return scalarMat(f[K+i], dim) }
	step(0, at)
	if K == 0 {
		return
	}
	// As in the search: σ²(z) + ν this small against the largest is a
	// location that adds nothing.
	tiny := nu
	for _, v := range f {
		tiny = math.Max(tiny, v+nu)
	}
	tiny *= 1e-12
	c0 := make([]float64, K*N)
	sp.CrossAll(zs, all, c0)
	us := make([]float64, K*N)
	for l := range K {
		if d := f[l] + nu; d > tiny {
			scale := 1 / math.Sqrt(d)
			row := us[l*N : (l+1)*N]
			for p := range row {
				c := c0[l*N+p]
				for m := range l {
					c -= us[m*N+l] * us[m*N+p]
				}
				row[p] = c * scale
			}
			for p, u := range row {
				f[p] = math.Max(f[p]-u*u, 0)
			}
		}
		step(l+1, at)
	}
}

// scalarMat is c·I on the first dim axes.
func scalarMat(c float64, dim int) transform.Mat {
	var m transform.Mat
	for k := range dim {
		m[k][k] = c
	}
	return m
}

func subMat(a, b transform.Mat) transform.Mat {
	for i := range 3 {
		for j := range 3 {
			a[i][j] -= b[i][j]
		}
	}
	return a
}

// addNoise is f + ν·I on the dim axes.
func addNoise(f transform.Mat, nu float64, dim int) transform.Mat {
	for k := range dim {
		f[k][k] += nu
	}
	return f
}

// clampFactor keeps a factor's diagonal from going below zero by rounding
// (a location picked where the variance is already nil).
func clampFactor(f transform.Mat, dim int) transform.Mat {
	for k := range dim {
		f[k][k] = math.Max(f[k][k], 0)
	}
	return f
}

// invCholT returns L⁻ᵀ for the Cholesky factor L Lᵀ = d of the leading
// dim×dim block, so that C·L⁻ᵀ·(C·L⁻ᵀ)ᵀ = C d⁻¹ Cᵀ. It reports false when
// d is not positive definite relative to its own size: a location that
// carries no information (the variance there and the noise both nil).
func invCholT(d transform.Mat, dim int) (transform.Mat, bool) {
	var l transform.Mat
	scale := 0.0
	for k := range dim {
		scale = math.Max(scale, math.Abs(d[k][k]))
	}
	if !(scale > 0) {
		return transform.Mat{}, false
	}
	for j := range dim {
		s := d[j][j]
		for k := range j {
			s -= l[j][k] * l[j][k]
		}
		if !(s > 1e-12*scale) {
			return transform.Mat{}, false
		}
		l[j][j] = math.Sqrt(s)
		for i := j + 1; i < dim; i++ {
			t := d[i][j]
			for k := range j {
				t -= l[i][k] * l[j][k]
			}
			l[i][j] = t / l[j][j]
		}
	}
	for k := dim; k < 3; k++ {
		l[k][k] = 1
	}
	inv, ok := l.Inverse()
	if !ok {
		return transform.Mat{}, false
	}
	inv = inv.T()
	for k := dim; k < 3; k++ {
		inv[k][k] = 0
	}
	return inv, true
}

// medianOf is the median, the mean of the middle two for an even count.
func medianOf(v []float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return 0.5 * (s[len(s)/2-1] + s[len(s)/2])
}

func meanOf(v []float64) float64 {
	sum := 0.0
	for _, x := range v {
		sum += x
	}
	return sum / float64(len(v))
}

// step records the cells' radii after the k-th suggested landmark (k = 0:
// before any) in res. For k > 0 it returns that suggestion with its rank,
// candidate, position and the cells' median and mean radius after it,
// for the caller to complete with the predicted target; for k = 0 it
// returns false.
func (res *Result) step(k int, chosen []int, radii []float64) (Suggestion, bool) {
	med, mean := medianOf(radii), meanOf(radii)
	if k == 0 {
		res.R95Before, res.MeanR95Before = med, mean
		res.CellR95Before = append([]float64(nil), radii...)
		return Suggestion{}, false
	}
	j := chosen[k-1]
	prev := res.R95Before
	if k > 1 {
		prev = res.Suggestions[k-2].R95After
	}
	return Suggestion{Rank: k, Candidate: j, Source: res.Candidates[j], R95After: med, Gain: prev - med, MeanR95After: mean}, true
}
