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
	rep := progress.Of(s.Progress)
	// Every S of the grid shares the kernel matrix and its projection, and
	// the fits at the S of one batch run side by side (SmoothingPath).
	path, pathErr := transform.NewSmoothingPath(q.Dim, q.Source, q.Target,
		transform.Options{Weights: w, Context: s.ctx})
	search := &smoothingSearch{unit: kernelScale(q), cost: map[float64]float64{}}
	search.eval = func(sms []float64) []float64 {
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
		return 0, err
	}
	if math.IsInf(bestCost, 1) {
		_, err := transform.Fit(transform.TPS, q.Dim, q.Source, q.Target,
			transform.Options{Weights: w, LeaveOneOut: true})
		return 0, err
	}
	return best, nil
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
		for j, c := range g.eval(sms) {
			g.cost[todo[j]] = c
		}
	}
	out := make([]float64, len(exps))
	for j, e := range exps {
		out[j] = g.cost[e]
	}
	return out
}

// whole searches S = 0 and the whole grid and returns the index of the
// grid's best exponent, −1 when S = 0 is best (ties go to the smaller S).
func (g *smoothingSearch) whole() int {
	exps := []float64{math.Inf(-1)}
	for k := range smoothingGridLen {
		exps = append(exps, gridExp(k))
	}
	cs := g.at(exps...)
	best, bestCost := -1, cs[0]
	for k := range smoothingGridLen {
		if c := cs[1+k]; c < bestCost {
			best, bestCost = k, c
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
	cs := g.at(exps...)
	best, bestCost := -1, math.Inf(1)
	for j, c := range cs[1:] {
		if c < bestCost {
			best, bestCost = 2*j, c
		}
	}
	if best < 0 || !(cs[0] > bestCost) {
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
		cs := g.at(e-0.25, e, e+0.25)
		down, here, up := cs[0], cs[1], cs[2]
		if math.IsInf(here, 0) || math.IsNaN(here) || down == here || up == here {
			return 0, false
		}
		if up < here && down < here {
			return 0, false // two minima
		}
		move := 0
		if !(up > here) {
			switch next := g.at(gridExp(k + 1))[0]; {
			case next < here:
				move = 1
			case !(next > here):
				return 0, false
			}
		}
		if move == 0 && !(down > here) {
			switch next := g.at(gridExp(k - 1))[0]; {
			case next < here:
				move = -1
			case !(next > here):
				return 0, false
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
		return 0, g.at(math.Inf(-1))[0]
	}
	e := gridExp(k)
	cs := g.at(e, e-0.25, e+0.25)
	best, bestCost := g.smoothing(e), cs[0]
	for j, de := range []float64{-0.25, 0.25} {
		if c := cs[1+j]; c < bestCost {
			best, bestCost = g.smoothing(e+de), c
		}
	}
	return best, bestCost
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
