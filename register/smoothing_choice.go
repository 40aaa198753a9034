package register

import (
	"ferry/progress"
	"math"
	"slices"

	"ferry/transform"
)

// chooseSmoothing picks the spline's S by minimising the weighted mean
// squared leave-one-out error of the unflagged landmarks (ordinary
// cross-validation; Wahba 1990, ch. 4) over a grid of S from exact
// interpolation to nearly affine, refined around the best. The scale of the
// grid follows the kernel: a typical landmark distance in 3-D, its square
// times its logarithm in 2-D.
//
// The check searches many sets that differ by a landmark or two (the
// sequential deletion, the retries of the set-aside landmarks), whose best
// S sits at or next to the previous set's. The search therefore starts
// where the check's last search ended (smoothingSearch.warm) and walks the
// grid from there, which finds the grid's best with three to five
// factorisations instead of seventeen when the cost has a single minimum
// along log S, and falls back to the whole grid when it cannot tell.
func chooseSmoothing(q *Problem, w []float64, s Settings) (float64, error) {
	sm, _, err := chooseSmoothingWith(q, w, s, nil)
	return sm, err
}

// chooseSmoothingWith is chooseSmoothing whose costs come, when fast is
// set, from fast (transform.SubsetPath: the set as a subset of a larger one
// reduced once) within the error each answer states. Every comparison the
// search makes is then decided as the costs of SmoothingPath decide it: by
// the fast costs when they differ by more than their errors, else by the
// costs of SmoothingPath, computed for the two smoothings compared. The S
// chosen is therefore the very S of chooseSmoothing. The second result is
// the fast answer at the S chosen, nil when there is none.
func chooseSmoothingWith(q *Problem, w []float64, s Settings, fast func(sms []float64) []transform.SubsetLOO) (float64, *transform.SubsetLOO, error) {
	rep := progress.Of(s.Progress)
	// Every S of the grid shares the kernel matrix and its projection, and
	// the fits at the S of one batch run side by side (SmoothingPath). With
	// fast answers it is built only if a comparison needs it.
	var path *transform.SmoothingPath
	var pathErr error
	pathMade := false
	exact := func(sms []float64) []float64 {
		if !pathMade {
			pathMade = true
			path, pathErr = transform.NewSmoothingPath(q.Dim, q.Source, q.Target,
				transform.Options{Weights: w, Context: s.ctx})
		}
		out := make([]float64, len(sms))
		var loo [][]transform.Vec
		var errs []error
		if pathErr == nil {
			path.Each = func() { rep.Add(1) }
			loo, errs = path.LeaveOneOut(sms)
		} else {
			rep.Add(len(sms))
		}
		for j := range sms {
			if pathErr != nil || errs[j] != nil {
				out[j] = math.Inf(1)
				continue
			}
			c := 0.0
			for i, r := range loo[j] {
				c += w[i] * r.Dot(r)
			}
			out[j] = c
		}
		return out
	}
	search := &smoothingSearch{unit: kernelScale(q), cost: map[float64]float64{}, eval: exact, exact: exact}
	answers := map[float64]*transform.SubsetLOO{}
	if fast != nil {
		search.fast = func(sms []float64) []costEst {
			res := fast(sms)
			out := make([]costEst, len(sms))
			var redo []int
			for j, r := range res {
				if !r.Sure {
					redo = append(redo, j)
					continue
				}
				rep.Add(1)
				c := 0.0
				for i, e := range r.LOO {
					c += w[i] * e.Dot(e)
				}
				// Each squared error is within 2·RelErr of its exact
				// value, and so is their weighted sum.
				out[j] = costEst{v: c, tol: 3 * r.RelErr * c, fast: true}
				answers[sms[j]] = &res[j]
			}
			if len(redo) > 0 {
				sub := make([]float64, len(redo))
				for k, j := range redo {
					sub[k] = sms[j]
				}
				for k, c := range exact(sub) {
					out[redo[k]] = costEst{v: c}
				}
			}
			return out
		}
	}
	gridBest, ok := -1, false
	if s.fits.searchWhole() {
		// No shortcut: the tests' reference.
	} else if k, has := s.fits.smoothingHint(); has {
		gridBest, ok = search.warm(k)
	} else {
		gridBest, ok = search.coarse()
	}
	if !ok {
		gridBest = search.whole()
	}
	s.fits.setSmoothingHint(gridBest)
	best, bestCost := search.refine(gridBest)
	if err := s.cancelled(); err != nil {
		return 0, nil, err
	}
	if math.IsInf(bestCost, 1) {
		_, err := transform.Fit(transform.TPS, q.Dim, q.Source, q.Target,
			transform.Options{Weights: w, LeaveOneOut: true})
		return 0, nil, err
	}
	return best, answers[best], nil
}

// The grid of chooseSmoothing: S = 0, then S = unit·10^e for e from
// smoothingGridLow to smoothingGridLow + (smoothingGridLen−1)/2 in steps of
// a half, and the two quarter steps either side of the grid's best.
const (
	smoothingGridLow = -6.0
	smoothingGridLen = 15
)

// smoothingSearch is one search of chooseSmoothing: the cost of each
// exponent e (S = unit·10^e; −∞ stands for S = 0) computed so far.
type smoothingSearch struct {
	unit float64
	// eval computes the costs of a batch of smoothings side by side.
	eval func(sms []float64) []float64
	cost map[float64]float64
	// fast, when set, computes the costs instead of eval, each within its
	// tol, which exact (SmoothingPath) then replaces where a comparison
	// needs it; tol holds the errors of the fast costs still standing.
	fast  func(sms []float64) []costEst
	exact func(sms []float64) []float64
	tol   map[float64]float64
}

// costEst is a fast cost and how far the exact cost may lie from it; a
// cost with fast false is exact.
type costEst struct {
	v, tol float64
	fast   bool
}

func gridExp(k int) float64 { return smoothingGridLow + 0.5*float64(k) }

func (g *smoothingSearch) smoothing(e float64) float64 {
	if math.IsInf(e, -1) {
		return 0
	}
	return g.unit * math.Pow(10, e)
}

// at returns the costs of the exponents, computing those not known yet in
// one batch.
func (g *smoothingSearch) at(exps ...float64) []float64 {
	var todo, sms []float64
	for _, e := range exps {
		if _, ok := g.cost[e]; !ok && !slices.Contains(todo, e) {
			todo = append(todo, e)
			sms = append(sms, g.smoothing(e))
		}
	}
	if len(todo) > 0 {
		if g.fast != nil {
			if g.tol == nil {
				g.tol = map[float64]float64{}
			}
			for j, c := range g.fast(sms) {
				g.cost[todo[j]] = c.v
				if c.fast {
					g.tol[todo[j]] = c.tol
				}
			}
		} else {
			for j, c := range g.eval(sms) {
				g.cost[todo[j]] = c
			}
		}
	}
	out := make([]float64, len(exps))
	for j, e := range exps {
		out[j] = g.cost[e]
	}
	return out
}

// pair returns the costs of a and b (computed if need be) such that any
// comparison of the two gives what the exact costs give: the fast costs
// when they are further apart than their errors, else the exact ones.
func (g *smoothingSearch) pair(a, b float64) (float64, float64) {
	g.at(a, b)
	ta, fa := g.tol[a]
	tb, fb := g.tol[b]
	if !fa && !fb {
		return g.cost[a], g.cost[b]
	}
	if d := math.Abs(g.cost[a] - g.cost[b]); d > ta+tb && !math.IsNaN(d) && !math.IsInf(d, 0) {
		return g.cost[a], g.cost[b]
	}
	g.sure(a, b)
	return g.cost[a], g.cost[b]
}

// value returns the cost of e for a test that a fast cost decides as the
// exact one does: whether it is finite (a fast cost is given only where the
// exact computation succeeds, so it is finite).
func (g *smoothingSearch) value(e float64) float64 {
	return g.at(e)[0]
}

// sure replaces the fast costs of the exponents by the exact ones.
func (g *smoothingSearch) sure(exps ...float64) {
	var todo, sms []float64
	for _, e := range exps {
		if _, fast := g.tol[e]; fast && !slices.Contains(todo, e) {
			todo = append(todo, e)
			sms = append(sms, g.smoothing(e))
		}
	}
	if len(todo) > 0 {
		for j, c := range g.exact(sms) {
			g.cost[todo[j]] = c
			delete(g.tol, todo[j])
		}
	}
}

// whole searches S = 0 and the whole grid and returns the index of the
// grid's best exponent, −1 when S = 0 is best (ties go to the smaller S).
func (g *smoothingSearch) whole() int {
	exps := []float64{math.Inf(-1)}
	for k := range smoothingGridLen {
		exps = append(exps, gridExp(k))
	}
	g.at(exps...)
	best, bestE := -1, exps[0]
	for k := range smoothingGridLen {
		if c, b := g.pair(exps[1+k], bestE); c < b {
			best, bestE = k, exps[1+k]
		}
	}
	return best
}

// coarse is the first search of a check: S = 0 and every other point of
// the grid, then warm from the best of those. If the cost is quasi-convex
// along log S the grid's best lies next to that point, and warm finds it
// with two to four more factorisations: eleven to fifteen in all instead
// of seventeen. When S = 0 is as good as any of them, or the best is at an
// end of the grid, whole decides (the points known are not computed again).
func (g *smoothingSearch) coarse() (int, bool) {
	exps := []float64{math.Inf(-1)}
	for k := 0; k < smoothingGridLen; k += 2 {
		exps = append(exps, gridExp(k))
	}
	g.at(exps...)
	best, bestE := -1, 0.0
	for j, e := range exps[1:] {
		if best < 0 {
			if c := g.value(e); c < math.Inf(1) {
				best, bestE = 2*j, e
			}
			continue
		}
		if c, b := g.pair(e, bestE); c < b {
			best, bestE = 2*j, e
		}
	}
	if best < 0 {
		return 0, false
	}
	if c0, b := g.pair(exps[0], bestE); !(c0 > b) {
		return 0, false
	}
	return g.warm(best)
}

// warm looks for the grid's best by walking from grid index k towards
// lower cost. It answers only when the walk ends inside the grid at a point
// strictly below its neighbours, each side told apart either by the grid
// neighbour or by the quarter step the refinement needs anyway: if the cost
// has a single minimum along log S (it is quasi-convex, as ordinary
// cross-validation is on the families of docs/methods.md), such a point is
// the one whole would find, S = 0 included, because every point beyond a
// higher neighbour is higher still. Ties, infinite costs and the grid's
// ends return false: whole decides.
func (g *smoothingSearch) warm(k int) (int, bool) {
	for range smoothingGridLen {
		if k <= 0 || k >= smoothingGridLen-1 {
			return 0, false
		}
		e := gridExp(k)
		g.at(e-0.25, e, e+0.25)
		if here := g.value(e); math.IsInf(here, 0) || math.IsNaN(here) {
			return 0, false
		}
		if d, h := g.pair(e-0.25, e); d == h {
			return 0, false
		}
		if u, h := g.pair(e+0.25, e); u == h {
			return 0, false
		}
		if u, h := g.pair(e+0.25, e); u < h {
			if d, h := g.pair(e-0.25, e); d < h {
				return 0, false // two minima
			}
		}
		move := 0
		if u, h := g.pair(e+0.25, e); !(u > h) {
			next, h := g.pair(gridExp(k+1), e)
			switch {
			case next < h:
				move = 1
			case !(next > h):
				return 0, false
			}
		}
		if move == 0 {
			if d, h := g.pair(e-0.25, e); !(d > h) {
				next, h := g.pair(gridExp(k-1), e)
				switch {
				case next < h:
					move = -1
				case !(next > h):
					return 0, false
				}
			}
		}
		if move == 0 {
			return k, true
		}
		k += move
	}
	return 0, false
}

// refine tries the quarter steps either side of the grid's best k (nothing
// when S = 0 is best) and returns the best S and its cost; ties go to the
// grid's point.
func (g *smoothingSearch) refine(k int) (float64, float64) {
	if k < 0 {
		return 0, g.value(math.Inf(-1))
	}
	e := gridExp(k)
	g.at(e, e-0.25, e+0.25)
	bestE := e
	for _, de := range []float64{-0.25, 0.25} {
		if c, b := g.pair(e+de, bestE); c < b {
			bestE = e + de
		}
	}
	return g.smoothing(bestE), g.value(bestE)
}

// kernelScale is the size of a typical kernel value between landmarks.
func kernelScale(p *Problem) float64 {
	sum, n := 0.0, 0
	step := max(1, p.Len()/50)
	for i := 0; i < p.Len(); i += step {
		for j := i + 1; j < p.Len(); j += step {
			sum += p.Source[i].Sub(p.Source[j]).Norm()
			n++
		}
	}
	d := 1.0
	if n > 0 && sum > 0 {
		d = sum / float64(n)
	}
	if p.Dim == 2 {
		return d * d * math.Max(math.Log(d), 1)
	}
	return d
}
