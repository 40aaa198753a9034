package register

import (
	"context"
	"errors"
	"ferry/internal/errkind"
	"ferry/progress"
	"fmt"
	"math"

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
		if sm, ok := s.fits.chosen(kind, p, weights, s); ok && s.Smoothing.Auto {
			// The search ran for these pairs already (flagging.go).
			opt.Smoothing = sm
		} else if s.Smoothing.Auto {
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
	if kind == transform.TPS && s.Smoothing.Auto {
		// The same fit is the one asked for with this smoothing given:
		// the check's last fit when no landmark was flagged, and the
		// second check of fit.
		fixed := s
		fixed.Smoothing = Smoothing{Value: opt.Smoothing}
		s.fits.put(kind, p, weights, fixed, f)
	}
	return f, nil
}
