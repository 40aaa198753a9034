package suggest

import (
	"ferry/progress"
	"math"
	"sort"

	"ferry/internal/parallel"
	"ferry/transform"
)

// score is the objective after adding one candidate: the median and the
// mean r95 (µm) of the search cells. A candidate that cannot be added has
// ok false.
type score struct {
	median, mean float64
	ok           bool
}

// better reports whether a beats b: a lower median, then a lower mean.
func (a score) better(b score) bool {
	if !b.ok {
		return a.ok
	}
	if !a.ok {
		return false
	}
	if a.median != b.median {
		return a.median < b.median
	}
	return a.mean < b.mean
}

// best is the index of the best score, the earliest among equals, or −1.
func best(scores []score) int {
	b := -1
	for j, s := range scores {
		if s.ok && (b < 0 || s.better(scores[b])) {
			b = j
		}
	}
	return b
}

// forCandidates runs work on every candidate index on all cores, handed
// out one at a time (a candidate's cost depends on how many cells it
// reaches), each worker with its own scratch of n numbers. Work writes only
// candidate j's own result, so the outcome does not depend on the cores.
func forCandidates(count, n int, work func(j int, scratch []float64)) {
	parallel.Blocks(count, 1, func() []float64 { return make([]float64, n) }, func(scratch []float64, lo, hi int) {
		for j := lo; j < hi; j++ {
			work(j, scratch)
		}
	})
}

// parallelRange runs work over [0, n) on all cores, for work of O(cells)
// or more per index.
func parallelRange(n int, work func(lo, hi int)) { parallel.Ranges(n, 64, work) }

// radiusKnots is the number of knots of a cell's table of r95 against its
// remaining variance.
const radiusKnots = 33

// scalarSearch is the greedy search for a predictor whose factors are
// scalars (the spline, a translation, an affine map). It holds the current
// covariance between every candidate and every search cell.
type scalarSearch struct {
	sp    transform.ScalarCrossPredictor
	nu    float64
	cand  []transform.Vec
	cells int
	// t[i] and vz[j] are the current variance factors at cell i and
	// candidate j; c[j·cells+i] their current covariance.
	t, vz, c []float64
	// uz[l] is the l-th choice's correction column at the candidates.
	uz     [][]float64
	chosen []bool
	// curve holds each cell's r95 at radiusKnots values of √(σ² + ν)
	// from √ν to √(σ²₀ + ν): knots[i·radiusKnots + k], with w0[i] the
	// first and inv[i] the inverse of the step.
	knots, w0, inv []float64
	// tiny is the size below which σ²(z) + ν means a location that adds
	// nothing.
	tiny float64
}

func newScalarSearch(sp transform.ScalarCrossPredictor, nu float64, model *cellModel, cells, cand []transform.Vec) *scalarSearch {
	s := &scalarSearch{sp: sp, nu: nu, cand: cand, cells: len(cells)}
	s.t = make([]float64, len(cells))
	s.vz = make([]float64, len(cand))
	sp.VarianceAll(cells, s.t)
	sp.VarianceAll(cand, s.vz)
	s.c = make([]float64, len(cand)*len(cells))
	sp.CrossAll(cand, cells, s.c)
	s.chosen = make([]bool, len(cand))
	top := nu
	for _, v := range s.vz {
		top = math.Max(top, v+nu)
	}
	s.tiny = 1e-12 * top

	s.knots = make([]float64, len(cells)*radiusKnots)
	s.w0 = make([]float64, len(cells))
	s.inv = make([]float64, len(cells))
	parallelRange(len(cells), func(lo, hi int) {
		for i := lo; i < hi; i++ {
			t0 := math.Max(s.t[i], 0)
			w0, w1 := math.Sqrt(nu), math.Sqrt(t0+nu)
			s.w0[i] = w0
			step := (w1 - w0) / (radiusKnots - 1)
			if step > 0 {
				s.inv[i] = 1 / step
			}
			for k := range radiusKnots {
				w := w0 + float64(k)*step
				f := math.Max(w*w-nu, 0)
				if k == radiusKnots-1 {
					f = t0
				}
				s.knots[i*radiusKnots+k] = model.radius(i, scalarMat(f, model.dim))
			}
			// The radius grows with the variance; the table of radii
			// interpolates and could dip by its own rounding, which the
			// search's thresholds must not see.
			r := s.knots[i*radiusKnots : (i+1)*radiusKnots]
			for k := 1; k < len(r); k++ {
				r[k] = math.Max(r[k], r[k-1])
			}
		}
	})
	return s
}

// radius is cell i's r95 at variance factor t, from its table.
func (s *scalarSearch) radius(i int, t float64) float64 {
	x := (math.Sqrt(t+s.nu) - s.w0[i]) * s.inv[i]
	k := int(x)
	if k < 0 {
		k, x = 0, 0
	}
	if k >= radiusKnots-1 {
		return s.knots[i*radiusKnots+radiusKnots-1]
	}
	r := s.knots[i*radiusKnots+k : i*radiusKnots+k+2]
	f := x - float64(k)
	return r[0] + f*(r[1]-r[0])
}

// leaders is how many candidates, those that lower the cells' variance the
// most in total, are scored in full first in each step: the best median
// among them is the bar every other candidate must clear.
const leaders = 8

// run chooses up to n candidates greedily and returns their indices.
//
// Scoring a candidate in full costs a median over the cells. Most
// candidates cannot win, and a count shows it: with m the best median
// found so far, a candidate that leaves no more than ⌈N/2⌉ − 1 of the N
// cells at r95 ≤ m has a median above m, and r95 ≤ m at cell i means that
// its variance drops by at least δ_i = σ²_i − τ_i(m), τ_i(m) the largest
// variance at which the cell's table gives r95 ≤ m. So each step scores the leaders in full,
// then counts for every other candidate the cells with C²/(σ²(z) + ν) ≥ δ_i,
// and scores in full the most promising few of those that might beat the
// bar; with the better bar it counts again, until none is left. The bar is
// set 1e-9 of itself above the best median so that rounding can never drop
// a candidate that ties: the choice is the one a full scoring of all
// candidates makes.
func (s *scalarSearch) run(n int, rep progress.Reporter) []int {
	var picks []int
	scores := make([]score, len(s.cand))
	proxy := make([]float64, len(s.cand))
	delta := make([]float64, s.cells)
	for range n {
		forCandidates(len(s.cand), 0, func(j int, _ []float64) {
			scores[j] = score{}
			proxy[j] = -1
			d := s.vz[j] + s.nu
			if s.chosen[j] || !(d > s.tiny) {
				return
			}
			sum := 0.0
			for _, c := range s.c[j*s.cells : (j+1)*s.cells] {
				sum += c * c
			}
			proxy[j] = sum / d
		})
		order := make([]int, 0, len(s.cand))
		for j, p := range proxy {
			if p >= 0 {
				order = append(order, j)
			}
		}
		if len(order) == 0 {
			break
		}
		sort.SliceStable(order, func(a, b int) bool { return proxy[order[a]] > proxy[order[b]] })
		lead := order[:min(leaders, len(order))]
		forCandidates(len(lead), s.cells, func(k int, r []float64) {
			scores[lead[k]] = s.score(lead[k], r)
		})
		// Raise the bar in rounds: count, score the most promising of the
		// candidates left in full, and count again with the better bar.
		need := (s.cells - 1) / 2 // a median ≤ bar has more than this many cells ≤ bar
		rest := order[len(lead):]
		keep := make([]bool, len(s.cand))
		for len(rest) > 0 {
			bar := scores[best(scores)].median * (1 + 1e-9)
			parallelRange(s.cells, func(lo, hi int) {
				for i := lo; i < hi; i++ {
					delta[i] = s.t[i] - s.threshold(i, bar)
				}
			})
			forCandidates(len(rest), 0, func(k int, _ []float64) {
				j := rest[k]
				d := s.vz[j] + s.nu
				count := 0
				for i, c := range s.c[j*s.cells : (j+1)*s.cells] {
					if c*c >= delta[i]*d {
						count++
					}
				}
				keep[j] = count > need
			})
			survivors := rest[:0]
			for _, j := range rest {
				if keep[j] {
					survivors = append(survivors, j)
				}
			}
			round := survivors[:min(len(survivors), 4*leaders)]
			forCandidates(len(round), s.cells, func(k int, r []float64) {
				scores[round[k]] = s.score(round[k], r)
			})
			rest = survivors[len(round):]
		}
		j := best(scores)
		s.add(j)
		picks = append(picks, j)
		rep.Add(1)
	}
	return picks
}

// score is the objective with a landmark at candidate j, in full.
func (s *scalarSearch) score(j int, r []float64) score {
	inv := 1 / (s.vz[j] + s.nu)
	row := s.c[j*s.cells : (j+1)*s.cells]
	sum := 0.0
	for i, c := range row {
		t := math.Max(s.t[i]-c*c*inv, 0)
		r[i] = s.radius(i, t)
		sum += r[i]
	}
	return score{median: selectMedian(r), mean: sum / float64(s.cells), ok: true}
}

// threshold is τ_i(m): the largest variance factor at which cell i's table
// gives r95 ≤ m; −∞ when even a nil variance gives more, +∞ when its
// present variance gives no more.
func (s *scalarSearch) threshold(i int, m float64) float64 {
	r := s.knots[i*radiusKnots : (i+1)*radiusKnots]
	if m < r[0] {
		return math.Inf(-1)
	}
	if m >= r[radiusKnots-1] {
		return math.Inf(1)
	}
	// The knots do not fall (newScalarSearch), so the last knot ≤ m
	// starts the segment where the table crosses m.
	k := sort.Search(radiusKnots, func(k int) bool { return r[k] > m }) - 1
	f := (m - r[k]) / (r[k+1] - r[k])
	w := s.w0[i] + (float64(k)+f)/s.inv[i]
	// Never below zero by rounding: r95 ≤ m holds at a nil variance.
	return math.Max(w*w-s.nu, 0)
}

// add conditions the covariances on a landmark at candidate j.
func (s *scalarSearch) add(j int) {
	d := s.vz[j] + s.nu
	scale := 1 / math.Sqrt(d)
	ux := make([]float64, s.cells)
	row := s.c[j*s.cells : (j+1)*s.cells]
	for i, c := range row {
		ux[i] = c * scale
	}
	// The current covariance of candidate j with every candidate: the
	// original one less the corrections of the earlier choices.
	uz := make([]float64, len(s.cand))
	s.sp.CrossAll(s.cand[j:j+1], s.cand, uz)
	for _, prev := range s.uz {
		pj := prev[j]
		for k := range uz {
			uz[k] -= pj * prev[k]
		}
	}
	for k := range uz {
		uz[k] *= scale
	}
	s.uz = append(s.uz, uz)
	parallelRange(len(s.cand), func(lo, hi int) {
		for k := lo; k < hi; k++ {
			a := uz[k]
			r := s.c[k*s.cells : (k+1)*s.cells]
			for i := range r {
				r[i] -= a * ux[i]
			}
			s.vz[k] = math.Max(s.vz[k]-a*a, 0)
		}
	})
	for i, u := range ux {
		s.t[i] = math.Max(s.t[i]-u*u, 0)
	}
	s.chosen[j] = true
}

// blockSearch is the greedy search for a predictor with matrix factors (a
// rigid motion or a similarity): covariances are computed when needed from
// CrossFactor and the low-rank corrections of the choices so far.
type blockSearch struct {
	cp    transform.CrossPredictor
	nu    float64
	dim   int
	model *cellModel
	cells []transform.Vec
	cand  []transform.Vec
	// fx and fz are the current factors at the cells and candidates;
	// ux[l] and uz[l] the l-th choice's corrections there.
	fx, fz []transform.Mat
	ux, uz [][]transform.Mat
	chosen []bool
}

func newBlockSearch(cp transform.CrossPredictor, nu float64, model *cellModel, cells, cand []transform.Vec) *blockSearch {
	b := &blockSearch{cp: cp, nu: nu, dim: model.dim, model: model, cells: cells, cand: cand}
	b.fx = make([]transform.Mat, len(cells))
	b.fz = make([]transform.Mat, len(cand))
	for i, x := range cells {
		b.fx[i] = cp.Factor(x)
	}
	for j, z := range cand {
		b.fz[j] = cp.Factor(z)
	}
	b.chosen = make([]bool, len(cand))
	return b
}

// cross is the current covariance factor between the errors at x, whose
// corrections are us[l][i], and at candidate j.
func (b *blockSearch) cross(x transform.Vec, us [][]transform.Mat, i, j int) transform.Mat {
	c := b.cp.CrossFactor(x, b.cand[j])
	for l := range b.uz {
		c = subMat(c, us[l][i].Mul(b.uz[l][j].T()))
	}
	return c
}

func (b *blockSearch) run(n int, rep progress.Reporter) []int {
	var picks []int
	scores := make([]score, len(b.cand))
	for range n {
		forCandidates(len(b.cand), len(b.cells), func(j int, r []float64) {
			if b.chosen[j] {
				scores[j] = score{}
				return
			}
			s, ok := invCholT(addNoise(b.fz[j], b.nu, b.dim), b.dim)
			if !ok {
				scores[j] = score{}
				return
			}
			sum := 0.0
			for i, x := range b.cells {
				u := b.cross(x, b.ux, i, j).Mul(s)
				f := clampFactor(subMat(b.fx[i], u.Mul(u.T())), b.dim)
				r[i] = b.model.radius(i, f)
				sum += r[i]
			}
			scores[j] = score{median: selectMedian(r), mean: sum / float64(len(b.cells)), ok: true}
		})
		j := best(scores)
		if j < 0 {
			break
		}
		b.add(j)
		picks = append(picks, j)
		rep.Add(1)
	}
	return picks
}

func (b *blockSearch) add(j int) {
	s, _ := invCholT(addNoise(b.fz[j], b.nu, b.dim), b.dim)
	ux := make([]transform.Mat, len(b.cells))
	uz := make([]transform.Mat, len(b.cand))
	parallelRange(len(b.cells), func(lo, hi int) {
		for i := lo; i < hi; i++ {
			ux[i] = b.cross(b.cells[i], b.ux, i, j).Mul(s)
		}
	})
	parallelRange(len(b.cand), func(lo, hi int) {
		for k := lo; k < hi; k++ {
			uz[k] = b.cross(b.cand[k], b.uz, k, j).Mul(s)
		}
	})
	for i := range ux {
		b.fx[i] = clampFactor(subMat(b.fx[i], ux[i].Mul(ux[i].T())), b.dim)
	}
	for k := range uz {
		b.fz[k] = clampFactor(subMat(b.fz[k], uz[k].Mul(uz[k].T())), b.dim)
	}
	b.ux = append(b.ux, ux)
	b.uz = append(b.uz, uz)
	b.chosen[j] = true
}

// selectMedian returns the median of v (the mean of the middle two for an
// even count), reordering v: Hoare's selection (Hoare 1961, Commun. ACM
// 4(7):321, "Algorithm 65: Find", cited from memory) with a median-of-three
// pivot, linear on average.
func selectMedian(v []float64) float64 {
	n := len(v)
	k := (n - 1) / 2
	lo, hi := 0, n-1
	for lo < hi {
		mid := lo + (hi-lo)/2
		// Order v[lo], v[mid], v[hi] and take the middle as the pivot.
		if v[mid] < v[lo] {
			v[mid], v[lo] = v[lo], v[mid]
		}
		if v[hi] < v[lo] {
			v[hi], v[lo] = v[lo], v[hi]
		}
		if v[hi] < v[mid] {
			v[hi], v[mid] = v[mid], v[hi]
		}
		pivot := v[mid]
		i, j := lo, hi
		for i <= j {
			for v[i] < pivot {
				i++
			}
			for v[j] > pivot {
				j--
			}
			if i <= j {
				v[i], v[j] = v[j], v[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			lo, hi = k, k
		}
	}
	m := v[k]
	if n%2 == 1 {
		return m
	}
	next := math.Inf(1)
	for _, x := range v[k+1:] {
		if x < next {
			next = x
		}
	}
	return 0.5 * (m + next)
}
