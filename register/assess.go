package register

import (
	"context"
	"errors"
	"ferry/internal/errkind"
	"ferry/internal/sample"
	"ferry/progress"
	"fmt"
	"math"
	"slices"
	"sort"

	"gonum.org/v1/gonum/stat/distuv"

	"ferry/landmarks"
	"ferry/transform"
)

// The statistics of the check. Each is stated in docs/methods.md.
const (
	// familyAlpha is the chance, over the whole landmark set, that a set
	// without any wrong landmark has one flagged: each landmark is tested at
	// familyAlpha/N (Bonferroni).
	familyAlpha = 0.05
	// maxFlagShare bounds the share of landmarks the check will set aside:
	// past it the set is not a good set with a few mistakes but a poor
	// registration, and flags would only hide that.
	maxFlagShare = 0.25
	// weightRatio is the ratio of the noise of two kinds of landmark (somata
	// against vessel branch points, say) from which they are weighted apart.
	weightRatio = 1.5
	// minPerKind is the fewest landmarks of a kind from which its own noise
	// is estimated.
	minPerKind = 5
)

// ModelScore is one model's leave-one-out performance.
type ModelScore struct {
	Model transform.Kind
	// Smoothing is the spline's S (0 for the other models).
	Smoothing float64
	// RMS, Median and Max are of the landmarks' leave-one-out errors (µm),
	// flagged landmarks left out.
	RMS, Median, Max float64
	// MeanSquare and its standard error (µm²) drive the choice.
	MeanSquare, StdErr float64
	Mirrored           bool
	// Err says why the model could not be fitted; the other fields are
	// then zero.
	Err error
	// sq are the squared errors behind MeanSquare, landmark by landmark,
	// for the paired comparison of models.
	sq []float64
}

// LandmarkCheck is the verdict on one landmark.
type LandmarkCheck struct {
	ID   string
	Kind landmarks.Kind
	// LOO is target minus the prediction from all other landmarks (µm),
	// LOOError its length.
	LOO      transform.Vec
	LOOError float64
	// R95 is the radius (µm) within which the leave-one-out error should
	// fall with 95 % probability.
	R95 float64
	// Score is the squared leave-one-out error standardised by its predicted
	// covariance, χ²-distributed with Dim degrees of freedom for a good
	// landmark.
	Score float64
	// Flag is empty for a good landmark, otherwise a short reason.
	Flag string
}

// Calibration compares predicted and observed leave-one-out errors.
type Calibration struct {
	// Inside is how many of N unflagged landmarks have their leave-one-out
	// error inside their predicted 95 % radius.
	Inside, N int
}

func (c *Calibration) add(inside bool) {
	c.N++
	if inside {
		c.Inside++
	}
}

// Share is Inside/N.
func (c Calibration) Share() float64 {
	if c.N == 0 {
		return math.NaN()
	}
	return float64(c.Inside) / float64(c.N)
}

// Assessment is the outcome of the check.
type Assessment struct {
	Dim int
	// Models are the models compared, simplest first.
	Models []ModelScore
	// Chosen is the model used, and Reason says why in a sentence.
	Chosen    transform.Kind
	Reason    string
	Smoothing float64
	// Landmarks are the verdicts, in the order of the problem.
	Landmarks []LandmarkCheck
	// Weights are the relative weights of the pairs in the fit (mean 1).
	Weights []float64
	// KindNoise gives each kind's noise relative to the set's when kinds
	// were weighted apart, nil otherwise.
	KindNoise map[landmarks.Kind]float64
	// Scale is the per-axis scale s_k (µm²) of the chosen model's errors,
	// estimated from the unflagged landmarks' leave-one-out errors.
	Scale       transform.Vec
	Calibration Calibration
	// CalibrationByStatus splits Calibration by the status each landmark
	// would have on the map when predicted from the others: status.OK
	// inside their hull, status.Extrapolated outside.
	CalibrationByStatus map[string]Calibration
	// FlagLimit is the most landmarks the check could flag: 0 when the set
	// is too small for any to be told wrong.
	FlagLimit int
	// Result is the chosen model fitted to every landmark of the problem,
	// flagged ones included, with leave-one-out.
	Result *transform.Result
	// Radii turns covariances into 95 % radii.
	Radii *RadiusTable
	// Warnings are the standing warnings of the fit (flagged landmarks in
	// it, a registration that cannot resolve cells), kept in the
	// transform file and repeated by map, match and report.
	Warnings []string
	// Field is the error model fitted to the clean landmarks (field.go),
	// nil when the chosen model or the set does not support it; the
	// landmarks' radii, the calibration and the map's radii then rest on
	// the per-axis Scale instead.
	Field *FieldParams
}

// Flagged returns the ids of the flagged landmarks.
func (a *Assessment) Flagged() []string {
	var ids []string
	for _, l := range a.Landmarks {
		if l.Flag != "" {
			ids = append(ids, l.ID)
		}
	}
	return ids
}

// MaxLOO is the largest leave-one-out error (µm) of the landmarks.
func (a *Assessment) MaxLOO() float64 {
	m := 0.0
	for _, l := range a.Landmarks {
		m = math.Max(m, l.LOOError)
	}
	return m
}

// Assess runs the check: it flags landmarks that look wrong, compares the
// models by exact leave-one-out on the others, chooses one (or takes the one
// asked for), estimates the scale of its errors and calibrates it.
//
// The verdicts (Landmarks) are of the clean set: every unflagged landmark
// predicted from the other unflagged ones, every flagged landmark from all
// the unflagged ones, so that a wrong landmark's error does not leak into
// its neighbours'. Result is the chosen model fitted to every landmark of
// the problem, flagged ones included: what the user asked to be fitted.
func Assess(p *Problem, s Settings) (*Assessment, error) {
	return AssessContext(context.Background(), p, s)
}

// AssessContext is Assess that stops, with ctx's error, between one fit and
// the next once ctx is cancelled.
func AssessContext(ctx context.Context, p *Problem, s Settings) (*Assessment, error) {
	s.ctx = ctx
	if s.fits == nil {
		s.fits = newFitCache()
	}
	if p.Len() == 0 {
		return nil, errors.New("no landmark pairs")
	}
	if p.Dim != 2 && p.Dim != 3 {
		return nil, fmt.Errorf("dimension %d: want 2 or 3", p.Dim)
	}
	if err := spreadAtAll(p); err != nil {
		return nil, err
	}
	if err := farOutlier(p); err != nil {
		return nil, err
	}
	if s.Model != "" {
		if err := enoughFor(p, s.Model); err != nil {
			return nil, err
		}
	}
	a := &Assessment{Dim: p.Dim, Radii: Radius95(p.Dim)}
	weights := equalWeights(p.Len())
	// How many fits the check needs depends on what it finds: the bar
	// counts them without a total.
	rep := progress.Of(s.Progress)
	rep.Step(fmt.Sprintf("leave-one-out fits of %d landmarks", p.Len()), 0)
	defer rep.Finish()

	// Flag with the model asked for or else with the most flexible model
	// the set supports: a wrong landmark is a local inconsistency, which the
	// spline sees best, and a warp that only the spline follows must not make
	// landmarks look wrong. An affine check would miss a wrong section hidden
	// in its own misfit, and would then let the mistake make the spline look
	// no better than an affine map.
	model := s.Model
	if model == "" {
		model = mostFlexible(p)
	}
	if model == transform.TPS {
		if err := repeatedSource(p); err != nil {
			return nil, err
		}
	}
	var flags *flagResult
	var field *fieldFit
	if useField(p, s) {
		var err error
		if flags, field, err = flagByField(p, a.Radii); err != nil {
			return nil, err
		}
		if w, noise := fieldWeights(p, &field.params); w != nil {
			weights, a.KindNoise = w, noise
		}
	} else {
		var err error
		if flags, err = flagLandmarks(p, model, weights, s, a.Radii); err != nil {
			return nil, err
		}
		if s.SourceSD == nil && s.TargetSD == nil {
			// Without stated picking errors, let each kind of landmark speak
			// for its own noise.
			if w, noise := kindWeights(p, flags.score, flags.flagged); w != nil {
				weights, a.KindNoise = w, noise
				if flags, err = flagLandmarks(p, model, weights, s, a.Radii); err != nil {
					return nil, err
				}
			}
		}
	}
	a.FlagLimit = flags.limit
	cleanIdx := indices(p.Len(), func(i int) bool { return !flags.flagged[i] })
	cleanSet := p.subset(func(i int) bool { return !flags.flagged[i] })
	if s.Model == "" {
		a.Models = compareModels(cleanSet, pick(weights, cleanIdx), s)
		var chosen transform.Kind
		if chosen, a.Reason = chooseModel(a.Models); chosen == "" {
			return nil, fmt.Errorf("no model could be fitted: %v", a.Models[0].Err)
		}
		model = chosen
	}
	a.Chosen, a.Weights = model, weights
	clean, err := fitModel(cleanSet, model, pick(weights, cleanIdx), s)
	if err != nil {
		return nil, err
	}
	if s.Model != "" {
		a.Models = []ModelScore{score(clean)}
		a.Reason = "asked for with --model"
	}
	// The scale of the clean fit's errors, and the verdicts in its terms.
	a.Scale = axisScale(clean.res, p.Dim)
	var fieldLOOVar []transform.Vec
	if field != nil && (model == transform.Affine || model == transform.TPS) {
		// The field's trend is affine: its variances hold for a model that
		// reproduces affine maps, not for a rigid motion, which may miss
		// part of the trend.
		// The model for the radii: chosen where the cells lie.
		if f, err := fitField(p.Dim, cleanSet.Source, cleanSet.Target, cleanSet.Kinds, nil, byLOO); err == nil {
			field = f
		}
		d := make([]float64, len(cleanIdx))
		for k, i := range cleanIdx {
			d[k] = field.params.kindNoise(p.Kinds[i])
		}
		if f, v, err := calibrateField(clean.res, cleanSet.Source, pick(weights, cleanIdx), d, &field.params, p.Dim); err == nil {
			a.Field, fieldLOOVar = f, v
		}
	}
	a.Landmarks = make([]LandmarkCheck, p.Len())
	for i := range a.Landmarks {
		a.Landmarks[i] = LandmarkCheck{ID: p.IDs[i], Kind: p.Kinds[i], Score: flags.score[i], Flag: flags.reason[i]}
	}
	status := looStatus(cleanSet.Source, p.Dim)
	a.CalibrationByStatus = map[string]Calibration{}
	for k, i := range cleanIdx {
		l := &a.Landmarks[i]
		l.LOO = clean.res.LOO[k]
		var cov transform.Mat
		if a.Field != nil {
			// The error model's variance of the fitted model's
			// leave-one-out error.
			cov = diagonal(fieldLOOVar[k], p.Dim)
		} else {
			cov = looCovariance(a.Scale, clean.res.LOOFactor[k], p.Dim)
			addPickNoise(&cov, s, clean.res.Transform.Jacobian(p.Source[i]), p.Dim)
		}
		l.R95 = a.Radii.Radius(cov)
		in := l.LOO.Norm() <= l.R95
		a.Calibration.add(in)
		st := status[k]
		c := a.CalibrationByStatus[st]
		c.add(in)
		a.CalibrationByStatus[st] = c
	}
	for i, loo := range flags.loo {
		l := &a.Landmarks[i]
		l.LOO, l.R95 = loo, flags.r95[i]
	}
	for i := range a.Landmarks {
		a.Landmarks[i].LOOError = a.Landmarks[i].LOO.Norm()
	}

	// The fit the user gets: every landmark they gave, with the smoothing
	// chosen on the clean ones, so that a wrong landmark does not decide how
	// stiff the spline is and the smoothing reported is the one used.
	fixed := s
	fixed.Smoothing = Smoothing{Value: clean.smoothing}
	full, err := fitModel(p, model, weights, fixed)
	if err != nil {
		return nil, err
	}
	a.Smoothing, a.Result = full.smoothing, full.res
	if err := a.finite(); err != nil {
		return nil, err
	}
	a.Warnings = a.standingWarnings()
	return a, nil
}

// coincidentUM is how close, along every axis, the landmarks of one side
// must all be to the first for them to count as a single position: a
// nanometre, a hundred times finer than anyone picks a landmark.
const coincidentUM = 1e-3

// spreadAtAll refuses landmarks that sit at one position on either side.
// Even a translation fits them, but nothing can then be said about any
// other point, and the leave-one-out errors, all zero, would promise a
// precision the landmarks do not have. Differences from the first landmark
// overflow only for coordinates near the largest float64, which are named
// as such.
func spreadAtAll(p *Problem) error {
	for _, side := range []struct {
		name string
		pos  []transform.Vec
	}{{"source", p.Source}, {"target", p.Target}} {
		largest := 0.0
		for _, x := range side.pos {
			d := x.Sub(side.pos[0])
			for k := range p.Dim {
				largest = math.Max(largest, math.Abs(d[k]))
			}
		}
		if math.IsInf(largest, 0) || math.IsNaN(largest) {
			return fmt.Errorf("%s landmarks: coordinates too large to compare (beyond ±%g µm)", side.name, MaxCoordinateUM)
		}
		if largest <= coincidentUM {
			return fmt.Errorf("all %d landmarks are at one %s position (within %g µm): a registration needs them spread over the volume", p.Len(), side.name, coincidentUM)
		}
	}
	return nil
}

// finite makes sure that no verdict holds a number that is not finite, so
// that none reaches the check's table, its JSON or the transform file; a
// landmark whose numbers are not finite is named.
func (a *Assessment) finite() error {
	for k := range a.Dim {
		if math.IsNaN(a.Scale[k]) || math.IsInf(a.Scale[k], 0) {
			return fmt.Errorf("the scale of the leave-one-out errors is not a finite number (%v µm² along axis %d): the landmark coordinates are too large or too close together to compute with", a.Scale[k], k+1)
		}
	}
	for _, l := range a.Landmarks {
		for _, v := range []struct {
			name string
			x    float64
		}{{"leave-one-out error", l.LOOError}, {"95 % radius", l.R95}, {"score", l.Score}} {
			if math.IsNaN(v.x) || math.IsInf(v.x, 0) {
				return fmt.Errorf("landmark %q: its %s is not a finite number (%v): the landmark coordinates are too large or too close together to compute with", l.ID, v.name, v.x)
			}
		}
	}
	return nil
}

// enoughFor checks that the set supports model before any fitting, with the
// plain-words reasons of landmarks.CheckSpread.
func enoughFor(p *Problem, model transform.Kind) error {
	need := transform.MinPairs(model, p.Dim) + 1
	if p.Len() < need {
		return errkind.New(transform.ErrTooFewPairs, "the %s model in %d-D needs at least %d landmark pairs for its leave-one-out check, have %d", model, p.Dim, need, p.Len())
	}
	spread := 0
	switch model {
	case transform.Rigid, transform.Similarity:
		spread = p.Dim - 1
	case transform.Affine, transform.TPS:
		spread = p.Dim
	}
	if err := landmarks.CheckSpread(p.Source, p.Dim, spread); err != nil {
		return fmt.Errorf("source landmarks: %v (the %s model needs them spread)", err, model)
	}
	if err := landmarks.CheckSpread(p.Target, p.Dim, spread); err != nil {
		return fmt.Errorf("target landmarks: %v (the %s model needs them spread)", err, model)
	}
	return nil
}

// mostFlexible is the richest model the set supports with a margin: the
// spline wants a few landmarks beyond its affine part to have anything to
// bend with.
func mostFlexible(p *Problem) transform.Kind {
	for _, k := range []transform.Kind{transform.TPS, transform.Affine, transform.Similarity, transform.Rigid} {
		margin := 1
		if k == transform.TPS {
			margin = 3 * (p.Dim + 1)
		}
		if p.Len() >= transform.MinPairs(k, p.Dim)+margin && enoughFor(p, k) == nil {
			return k
		}
	}
	return transform.Translation
}

func equalWeights(n int) []float64 {
	w := make([]float64, n)
	for i := range w {
		w[i] = 1
	}
	return w
}

// fitted is one model fitted with leave-one-out.
type fitted struct {
	kind      transform.Kind
	smoothing float64
	res       *transform.Result
}

// fitModel fits kind to every pair of p with leave-one-out, the spline's
// smoothing, when automatic, chosen on the same pairs.
func fitModel(p *Problem, kind transform.Kind, weights []float64, s Settings) (*fitted, error) {
	if err := s.cancelled(); err != nil {
		return nil, err
	}
	if f := s.fits.get(kind, p, weights, s); f != nil {
		progress.Of(s.Progress).Add(1)
		return f, nil
	}
	opt := transform.Options{Weights: weights, NoMirror: s.NoMirror, LeaveOneOut: true, Context: s.ctx}
	if kind == transform.TPS {
		if s.Smoothing.Auto {
			sm, err := chooseSmoothing(p, weights, s)
			if err != nil {
				return nil, err
			}
			opt.Smoothing = sm
		} else {
			opt.Smoothing = s.Smoothing.Value
		}
	}
	res, err := transform.Fit(kind, p.Dim, p.Source, p.Target, opt)
	progress.Of(s.Progress).Add(1)
	if err != nil {
		return nil, fmt.Errorf("%s fit: %w", kind, err)
	}
	f := &fitted{kind: kind, smoothing: opt.Smoothing, res: res}
	s.fits.put(kind, p, weights, s, f)
	return f, nil
}

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

// flagResult is the outcome of flagLandmarks.
type flagResult struct {
	flagged []bool
	reason  []string
	// score is each landmark's externally studentised score: in the clean
	// fit for an unflagged landmark, against the clean set for a flagged
	// one.
	score []float64
	// loo and r95 are the flagged landmarks' errors against the clean set
	// and their 95 % radii.
	loo map[int]transform.Vec
	r95 map[int]float64
	// limit is the most landmarks the check could set aside.
	limit int
}

// flagLandmarks finds the landmarks that look wrong by sequential deletion.
// Each landmark's leave-one-out error is standardised by its predicted
// covariance with the per-axis scale estimated from the other landmarks
// still in the set (external studentisation: Cook & Weisberg 1982,
// "Residuals and Influence in Regression", §2.2), so that a wrong landmark
// does not hide itself by inflating the scale. While the worst score
// exceeds the threshold of studentisedThreshold, that landmark is set aside
// and the rest refitted: a wrong landmark inflates its neighbours'
// leave-one-out errors, so they are only judged once it is gone, and a
// smaller mistake that the first one masked shows up after it. Last, every
// set-aside landmark is tried again alone against the clean set and cleared
// when it fits after all.
func flagLandmarks(p *Problem, model transform.Kind, weights []float64, s Settings, radii *RadiusTable) (*flagResult, error) {
	n := p.Len()
	out := &flagResult{
		flagged: make([]bool, n), reason: make([]string, n), score: make([]float64, n),
		loo: map[int]transform.Vec{}, r95: map[int]float64{},
	}
	limit := int(maxFlagShare * float64(n))
	if n-limit < transform.MinPairs(model, p.Dim)+3 {
		limit = max(0, n-transform.MinPairs(model, p.Dim)-3)
	}
	out.limit = limit
	var setAside []int
	for {
		keep := func(i int) bool { return !out.flagged[i] }
		idx := indices(n, keep)
		f, err := fitModel(p.subset(keep), model, pick(weights, idx), s)
		if err != nil {
			return nil, err
		}
		scores := studentise(f.res, p.Dim, s, p.subset(keep).Source, -1)
		threshold := studentisedThreshold(p.Dim, len(idx), n)
		worst, worstScore := -1, threshold
		for k, i := range idx {
			out.score[i] = scores[k]
			if scores[k] > worstScore && f.res.LOO[k].Norm() >= minFlagErrorUM {
				worst, worstScore = i, scores[k]
			}
		}
		if worst < 0 || len(setAside) >= limit {
			break
		}
		out.flagged[worst] = true
		setAside = append(setAside, worst)
	}
	// Try each set-aside landmark again against the clean set.
	for _, i := range setAside {
		keep := func(j int) bool { return j == i || !out.flagged[j] }
		idx := indices(n, keep)
		q := p.subset(keep)
		f, err := fitModel(q, model, pick(weights, idx), s)
		if err != nil {
			return nil, err
		}
		k := sort.SearchInts(idx, i)
		out.score[i] = studentise(f.res, p.Dim, s, q.Source, k)[k]
		if out.score[i] <= studentisedThreshold(p.Dim, len(idx), n) || f.res.LOO[k].Norm() < minFlagErrorUM {
			out.flagged[i] = false
			continue
		}
		scale := externalScale(f.res, p.Dim, k)
		cov := looCovariance(scale, f.res.LOOFactor[k], p.Dim)
		addPickNoise(&cov, s, f.res.Transform.Jacobian(q.Source[k]), p.Dim)
		out.loo[i], out.r95[i] = f.res.LOO[k], radii.Radius(cov)
		out.reason[i] = flagReason(f.res.LOO[k], cov, out.r95[i], p.Dim)
	}
	return out, nil
}

// studentise scores every landmark of a fit (only landmark only, when
// only ≥ 0): r_iᵀC_i⁻¹r_i with C_i the predicted covariance of its
// leave-one-out error, the scale estimated without it, raised to the stated
// picking noise.
func studentise(res *transform.Result, dim int, s Settings, src []transform.Vec, only int) []float64 {
	out := make([]float64, len(res.LOO))
	total := axisSums(res, dim)
	for i := range res.LOO {
		if only >= 0 && i != only {
			continue
		}
		scale := withoutOne(total, res, dim, i)
		cov := looCovariance(scale, res.LOOFactor[i], dim)
		addPickNoise(&cov, s, res.Transform.Jacobian(src[i]), dim)
		out[i] = standardised(res.LOO[i], cov, dim)
	}
	return out
}

// externalScale is the per-axis scale without landmark i.
func externalScale(res *transform.Result, dim, i int) transform.Vec {
	return withoutOne(axisSums(res, dim), res, dim, i)
}

// axisSums are the per-axis sums of standardised squares of a fit.
func axisSums(res *transform.Result, dim int) transform.Vec {
	var t transform.Vec
	for i, r := range res.LOO {
		for k := range dim {
			t[k] += r[k] * r[k] / res.LOOFactor[i]
		}
	}
	return t
}

// withoutOne turns the sums into the mean without landmark i.
func withoutOne(total transform.Vec, res *transform.Result, dim, i int) transform.Vec {
	var sc transform.Vec
	n := float64(max(len(res.LOO)-1, 1))
	for k := range dim {
		r := res.LOO[i][k]
		sc[k] = math.Max(total[k]-r*r/res.LOOFactor[i], 0) / n
	}
	return floorScale(sc, dim)
}

// studentisedThreshold is the score above which a landmark looks wrong:
// the 1 − familyAlpha/N quantile of an externally studentised score of d
// axes, each axis's scale resting on the m−1 other landmarks in the set (N
// is the size of the whole set, for the Bonferroni correction over every
// landmark tested). Each axis's term is then F(1, m−1)-distributed; their sum
// has no closed form, so it is matched in mean and variance by a scaled χ²
// (Satterthwaite 1946, Biometrics Bulletin 2(6):110–114), which is accurate
// in the upper tail for m above about ten. With many landmarks the threshold
// tends to the χ²_d quantile.
func studentisedThreshold(dim, m, n int) float64 {
	p := 1 - familyAlpha/float64(n)
	nu := float64(m - 1)
	if nu <= 4.5 {
		// Too few landmarks for the variance of F to exist: fall back to
		// the common-denominator bound d·F(d, ν), which is larger.
		return float64(dim) * distuv.F{D1: float64(dim), D2: math.Max(nu, 1)}.Quantile(p)
	}
	d := float64(dim)
	mean := d * nu / (nu - 2)
	variance := d * 2 * nu * nu * (nu - 1) / ((nu - 2) * (nu - 2) * (nu - 4))
	c := variance / (2 * mean)
	return c * distuv.ChiSquared{K: mean / c}.Quantile(p)
}

// flagReason says in a few words what is wrong and what it may be.
func flagReason(loo transform.Vec, cov transform.Mat, r95 float64, dim int) string {
	reason := fmt.Sprintf("off by %.1f µm where 95 %% stay within %.1f µm", loo.Norm(), r95)
	if dim == 3 && cov[2][2] > 0 {
		total := standardised(loo, cov, dim)
		zOnly := loo[2] * loo[2] / cov[2][2]
		// Mostly along z in the standardised error, or in micrometres:
		// the error model may know x and y so well that their few
		// micrometres weigh more than the section's tens.
		if zOnly > 0.8*total || loo[2]*loo[2] > 0.8*loo.Dot(loo) {
			return reason + "; mostly in z: a wrong section?"
		}
	}
	return reason + "; a wrong correspondence or a typo?"
}

// addPickNoise raises a leave-one-out covariance to at least the picking
// noise stated with --source-sd and --target-sd, carried into the target
// through the Jacobian: a check may not call a landmark wrong for an error
// smaller than the user says the picks have.
func addPickNoise(cov *transform.Mat, s Settings, jac transform.Mat, dim int) {
	noise := pickNoise(s, jac)
	for k := range dim {
		cov[k][k] = math.Max(cov[k][k], noise[k][k])
	}
}

// pickNoise is J·Σ_source·Jᵀ + Σ_target from the sd flags (zero without).
func pickNoise(s Settings, jac transform.Mat) transform.Mat {
	var c transform.Mat
	if s.SourceSD != nil {
		var d transform.Mat
		for k := range 3 {
			d[k][k] = s.SourceSD[k] * s.SourceSD[k]
		}
		c = jac.Mul(d).Mul(jac.T())
	}
	if s.TargetSD != nil {
		for k := range 3 {
			c[k][k] += s.TargetSD[k] * s.TargetSD[k]
		}
	}
	return c
}

// kindWeights estimates the noise of each kind of landmark from the
// standardised scores of the unflagged ones and, where kinds differ by more
// than weightRatio, returns weights (mean 1) that are the inverse of each
// kind's noise. It returns nil when the kinds do not differ or too few of a
// kind are at hand.
func kindWeights(p *Problem, score []float64, flagged []bool) ([]float64, map[landmarks.Kind]float64) {
	byKind := map[landmarks.Kind][]float64{}
	var all []float64
	for i, k := range p.Kinds {
		if !flagged[i] {
			byKind[k] = append(byKind[k], score[i])
			all = append(all, score[i])
		}
	}
	if len(byKind) < 2 {
		return nil, nil
	}
	overall := sample.Median(all)
	noise := map[landmarks.Kind]float64{}
	lo, hi := math.Inf(1), 0.0
	for k, sc := range byKind {
		if len(sc) < minPerKind {
			return nil, nil
		}
		noise[k] = sample.Median(sc) / overall
		lo, hi = math.Min(lo, noise[k]), math.Max(hi, noise[k])
	}
	if !(hi > weightRatio*lo) {
		return nil, nil
	}
	w := make([]float64, p.Len())
	sum := 0.0
	for i, k := range p.Kinds {
		v, ok := noise[k]
		if !ok {
			v = 1
		}
		w[i] = 1 / v
		sum += w[i]
	}
	for i := range w {
		w[i] *= float64(len(w)) / sum
	}
	return w, noise
}

// compareModels fits every model the set supports and scores it.
func compareModels(p *Problem, weights []float64, s Settings) []ModelScore {
	var scores []ModelScore
	for _, k := range transform.Kinds() {
		if err := enoughFor(p, k); err != nil {
			scores = append(scores, ModelScore{Model: k, Err: err})
			continue
		}
		f, err := fitModel(p, k, weights, s)
		if err != nil {
			scores = append(scores, ModelScore{Model: k, Err: err})
			continue
		}
		scores = append(scores, score(f))
	}
	return scores
}

// score summarises a fit's leave-one-out errors.
func score(f *fitted) ModelScore {
	var sq, e []float64
	for _, r := range f.res.LOO {
		sq = append(sq, r.Dot(r))
		e = append(e, r.Norm())
	}
	mean, se := meanStdErr(sq)
	return ModelScore{
		Model: f.kind, Smoothing: f.smoothing, RMS: math.Sqrt(mean), Median: sample.Median(e),
		Max: maxOf(e), MeanSquare: mean, StdErr: se, Mirrored: f.res.Mirrored,
		sq: sq,
	}
}

// chooseModel takes the simplest model whose mean squared leave-one-out
// error exceeds the best model's by no more than one standard error of their
// paired difference (the one-standard-error rule; Breiman, Friedman, Olshen
// & Stone 1984, "Classification and Regression Trees", §3.4.3). The pairing
// matters: two models are judged on the same landmarks, so the difference
// varies far less than either error alone.
func chooseModel(models []ModelScore) (transform.Kind, string) {
	best := -1
	for i, m := range models {
		if m.Err == nil && (best < 0 || m.MeanSquare < models[best].MeanSquare) {
			best = i
		}
	}
	if best < 0 {
		return "", ""
	}
	for i, m := range models {
		if m.Err != nil {
			continue
		}
		if i == best {
			break
		}
		diff := make([]float64, len(m.sq))
		for j := range diff {
			diff[j] = m.sq[j] - models[best].sq[j]
		}
		mean, se := meanStdErr(diff)
		if mean <= se {
			return m.Model, fmt.Sprintf("RMS %.2f µm: the simplest model within one standard error of the best, %s (RMS %.2f µm)",
				m.RMS, models[best].Model, models[best].RMS)
		}
	}
	b := models[best]
	reason := fmt.Sprintf("RMS %.2f µm: the lowest leave-one-out error", b.RMS)
	for i := best - 1; i >= 0; i-- {
		if models[i].Err == nil {
			reason += fmt.Sprintf("; the next simpler model, %s (RMS %.2f µm), is worse by more than one standard error", models[i].Model, models[i].RMS)
			break
		}
	}
	return b.Model, reason
}

// axisScale estimates the per-axis scale as the mean standardised square of
// a fit's leave-one-out errors: the efficient estimate, for a fit to the
// landmarks that passed the check.
func axisScale(res *transform.Result, dim int) transform.Vec {
	s := axisSums(res, dim)
	for k := range dim {
		s[k] /= float64(max(len(res.LOO), 1))
	}
	return floorScale(s, dim)
}

// floorScale keeps a scale from being exactly zero (a perfect fit of exact
// synthetic data), which would make every standardised error infinite.
func floorScale(s transform.Vec, dim int) transform.Vec {
	m := 0.0
	for k := range dim {
		m = math.Max(m, s[k])
	}
	floor := math.Max(m*1e-12, 1e-24)
	for k := range dim {
		s[k] = math.Max(s[k], floor)
	}
	return s
}

// looCovariance is the predicted covariance of a leave-one-out error.
func looCovariance(scale transform.Vec, factor float64, dim int) transform.Mat {
	var c transform.Mat
	for k := range dim {
		c[k][k] = scale[k] * factor
	}
	return c
}

// standardised is rᵀC⁻¹r for a diagonal C.
func standardised(r transform.Vec, c transform.Mat, dim int) float64 {
	s := 0.0
	for k := range dim {
		if c[k][k] > 0 {
			s += r[k] * r[k] / c[k][k]
		}
	}
	return s
}

func indices(n int, keep func(int) bool) []int {
	var idx []int
	for i := range n {
		if keep(i) {
			idx = append(idx, i)
		}
	}
	return idx
}

func pick(v []float64, idx []int) []float64 {
	out := make([]float64, len(idx))
	for k, i := range idx {
		out[k] = v[i]
	}
	return out
}

func maxOf(v []float64) float64 {
	m := 0.0
	for _, x := range v {
		m = math.Max(m, x)
	}
	return m
}

func meanStdErr(v []float64) (mean, se float64) {
	if len(v) == 0 {
		return math.NaN(), math.NaN()
	}
	for _, x := range v {
		mean += x
	}
	mean /= float64(len(v))
	if len(v) < 2 {
		return mean, math.Inf(1)
	}
	ss := 0.0
	for _, x := range v {
		ss += (x - mean) * (x - mean)
	}
	return mean, math.Sqrt(ss / float64(len(v)-1) / float64(len(v)))
}
