package refine

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/stat/distuv"

	"ferry/progress"
	"ferry/register"
	"ferry/register/match"
	"ferry/status"
	"ferry/transform"
)

// The defaults of Options, stated in docs/methods.md.
const (
	// DefaultMinP is the posterior probability from which a pair becomes a
	// pseudo-landmark in the last rounds.
	DefaultMinP = 0.99
	// DefaultMaxRounds bounds the rounds of matching and refitting.
	DefaultMaxRounds = 12
	// DefaultMaxNodes bounds the nodes of the refined spline, landmarks
	// included: a dense fit with exact leave-one-out costs O(N³) time and
	// O(N²) memory, about 0.7 s and 18 MB at 1,500 nodes on two cores.
	DefaultMaxNodes = 1500
)

// startP are the thresholds of the first rounds: only the clearest pairs,
// which lie where the landmarks constrain the map best, move the spline
// first; the threshold then falls to Options.MinP.
var startP = []float64{0.999, 0.995}

// stableShare: the rounds stop once at most this share of the pairs (and at
// least stableLeast pairs) changed since the round before at the final
// threshold: a pair or two near the threshold may go in and out for ever.
const (
	stableShare = 0.01
	stableLeast = 3
)

// Options steer Refine. The zero value of a field means its default.
type Options struct {
	// Settings are the landmark fit's settings, as for register.Assess.
	Settings register.Settings
	// CellSD is the localisation standard deviation of the somata's
	// coordinates (source µm per axis); nil takes the landmarks' picking
	// noise.
	CellSD *transform.Vec
	// CandidateSD is the spread of a candidate about its soma's centre (µm
	// per axis); zero means match.DefaultCandidateSD.
	CandidateSD float64
	// MinP is the posterior probability from which a pair is used, in
	// (0.5, 1); zero means DefaultMinP.
	MinP float64
	// MaxRounds and MaxNodes: zero means their defaults.
	MaxRounds, MaxNodes int
	// Progress receives the rounds; nil shows nothing.
	Progress progress.Reporter
}

// Input is what Refine works on, every position in micrometres.
type Input struct {
	// Landmarks are the landmark pairs, the user's exclusions removed.
	Landmarks *register.Problem
	// Assessment, when not nil, is register.Assess of Landmarks with
	// Options.Settings, already run; Refine runs it otherwise.
	Assessment *register.Assessment
	// Somata are the in vivo somata (source): the cells, then any more.
	// SomaIDs name them (unique).
	Somata  []transform.Vec
	SomaIDs []string
	// Candidates (target) and their ids.
	Candidates   []transform.Vec
	CandidateIDs []string
	// Decisions, when not nil, are a person's verdicts by index into
	// Somata and Candidates (the cells come first among the somata, so
	// decisions resolved against the cells index them unchanged). Every
	// round's matching takes them as match does: a rejected pair and a
	// candidate accepted for another soma are never paired, a soma with no
	// counterpart never pairs, and an accepted soma is not paired either:
	// its pair belongs among the Landmarks, as match.AddDecidedLandmarks
	// puts it, where it weighs as a landmark with its own noise rather than
	// as a soma pair that the rounds may drop.
	Decisions *match.Decisions
}

// Pair is one correspondence relied on.
type Pair struct {
	// Soma and Candidate index the input's somata and candidates.
	Soma, Candidate int
	// P is the posterior probability of the pair when it was chosen.
	P float64
	// Source and Target are the soma's and the candidate's positions (µm).
	Source, Target transform.Vec
	// Node reports a node of the refined spline (every pair up to
	// Options.MaxNodes).
	Node bool
	// LOO is the target minus the prediction without the pair (µm), R95
	// the radius within which it should fall with 95 % probability.
	LOO transform.Vec
	R95 float64
}

// Round is one round of matching and refitting.
type Round struct {
	// Threshold is the least posterior probability of a pair used.
	Threshold float64 `json:"threshold_p"`
	// Pairs were used, Nodes of them as nodes of the spline.
	Pairs int `json:"pairs"`
	Nodes int `json:"nodes"`
	// Added, Dropped and Switched compare the pairs with the round before:
	// somata newly paired, no longer paired, paired to another candidate.
	Added    int `json:"added"`
	Dropped  int `json:"dropped"`
	Switched int `json:"switched"`
	// Proposed is how many of the pairs were found at the offset the
	// soma's neighbours agreed on (constellation.go) rather than where the
	// fit maps it: each soma once, to be confirmed by the refitted spline
	// in the rounds after.
	Proposed int `json:"proposed"`
	// Smoothing is the spline's S along x and y, SmoothingZ along z;
	// LandmarkRMS the landmarks' leave-one-out RMS error (µm) in the fit.
	Smoothing   float64 `json:"smoothing"`
	SmoothingZ  float64 `json:"smoothing_z"`
	LandmarkRMS float64 `json:"landmark_loo_rms_um"`
}

// Changed is Added + Dropped + Switched.
func (r Round) Changed() int { return r.Added + r.Dropped + r.Switched }

// Result is the outcome of Refine.
type Result struct {
	Dim int
	// Landmark is the check and fit of the landmarks alone, as fit does.
	Landmark *register.Assessment
	// Transform is the refined spline (the landmark fit when no pair was
	// found), Smoothing its S along x and y (and the transform file's),
	// SmoothingZ along z.
	Transform             transform.Transform
	Smoothing, SmoothingZ float64
	// Nodes, Targets and Weights are what the spline was fitted to:
	// the landmarks first, then the pairs that are nodes.
	Nodes, Targets []transform.Vec
	Weights        []float64
	// Scale is the per-axis scale (µm²) of the refined fit's errors.
	Scale transform.Vec
	// Pairs are the correspondences of the last round, by soma.
	Pairs []Pair
	// PairWeight is the weight of a pair relative to a landmark of weight 1.
	PairWeight float64
	Rounds     []Round
	// LandmarkBefore and LandmarkAfter are the landmarks' leave-one-out
	// errors (µm) in the landmark fit and in the refined fit.
	LandmarkBefore, LandmarkAfter []float64
	// Worse is set when the refined fit predicts the landmarks worse, with
	// the reason.
	Worse       bool
	WorseReason string
	// PairCalibration counts the pairs whose leave-one-out error lies
	// inside their 95 % radius.
	PairCalibration register.Calibration
	// HeldOut are the node pairs' held-out predictions (register.HeldOut),
	// then the other somata whose factor the local calibration widened.
	HeldOut []register.HeldOut
	// Uncertainty is the refined fit's uncertainty model.
	Uncertainty *register.UncertaintyModel
}

// Refine fits the landmarks and refines the fit with the somata and the
// candidates; see the package documentation.
func Refine(in Input, opt Options) (*Result, error) {
	opt, err := opt.withDefaults()
	if err != nil {
		return nil, err
	}
	p := in.Landmarks
	if p == nil {
		return nil, errors.New("refine: no landmarks")
	}
	if len(in.SomaIDs) != len(in.Somata) || len(in.CandidateIDs) != len(in.Candidates) {
		return nil, errors.New("refine: ids and positions differ in number")
	}
	if err := checkDecisions(in.Decisions, len(in.Somata), len(in.Candidates)); err != nil {
		return nil, err
	}
	rep := progress.Of(opt.Progress)
	a := in.Assessment
	if a == nil {
		rep.Step("fitting the landmarks", 0)
		a, err = register.Assess(p, opt.Settings)
		rep.Finish()
		if err != nil {
			return nil, err
		}
	}
	r := &refiner{in: in, opt: opt, a: a, dim: p.Dim, radii: register.Radius95(p.Dim), rep: rep}
	r.base = register.NewUncertaintyModel(p, a, opt.Settings)
	r.pairWeight = r.relativePairWeight()
	res := &Result{Dim: p.Dim, Landmark: a, Transform: a.Result.Transform, Smoothing: a.Smoothing, PairWeight: r.pairWeight}
	for _, e := range a.Result.LOO {
		res.LandmarkBefore = append(res.LandmarkBefore, e.Norm())
	}

	mapper, err := r.mapper(nil)
	if err != nil {
		return nil, err
	}
	// The rounds see only the candidates near the somata; r.cand maps
	// their indices back to the caller's.
	r.cand = withAccepted(nearCandidates(mapper, in.Somata, opt.CellSD, in.Candidates, p.Dim), in.Decisions)
	r.dec = localDecisions(in.Decisions, r.cand)
	r.candPos = make([]transform.Vec, len(r.cand))
	r.candIDs = make([]string, len(r.cand))
	for k, j := range r.cand {
		r.candPos[k], r.candIDs[k] = in.Candidates[j], in.CandidateIDs[j]
	}
	var (
		cur *fitState
		// prev and before are the pairs of the last two rounds, soma to
		// candidate.
		prev, before map[int]int
	)
	hint := [2]float64{a.Smoothing, a.Smoothing}
	// confirming is set once the rounds are stable but for proposals: no
	// soma is proposed after that.
	confirming := false
	for round := 0; round < opt.MaxRounds; round++ {
		threshold := opt.MinP
		if round < len(startP) {
			threshold = math.Max(startP[round], opt.MinP)
		}
		// One stage a round; its units are the matchings and the spline
		// fits, each a second or more on a large block.
		rep.Step(fmt.Sprintf("refining with %d somata, round %d (fits and matchings)", len(in.Somata), round+1), 0)
		// The last round proposes nothing: every pair it keeps is clear
		// where the refitted spline, without the pair, maps its soma.
		pairs, proposed, err := r.choosePairs(mapper, threshold, round < opt.MaxRounds-1 && !confirming)
		if err != nil {
			rep.Finish()
			return nil, err
		}
		rd := Round{Threshold: threshold, Pairs: len(pairs), Proposed: proposed}
		now := make(map[int]int, len(pairs))
		for _, pr := range pairs {
			now[pr.Soma] = pr.Candidate
		}
		for s, c := range now {
			switch old, ok := prev[s]; {
			case !ok:
				rd.Added++
			case old != c:
				rd.Switched++
			}
		}
		for s := range prev {
			if _, ok := now[s]; !ok {
				rd.Dropped++
			}
		}
		if len(pairs) == 0 {
			rep.Finish()
			res.Rounds = append(res.Rounds, rd)
			if threshold > opt.MinP {
				// Nothing that clear yet: lower the threshold.
				continue
			}
			break
		}
		// The smoothing is searched widely until the threshold reaches its
		// final value, and kept after that: the pairs kept are those the
		// last fit predicts well, so a stiffer fit keeps pairs that agree
		// with stiffness, which call for a stiffer fit again, and a
		// smoothing searched afresh each round drifted up round after
		// round while the landmarks' errors grew.
		wide := round <= len(startP) || cur == nil
		next, err := r.fit(pairs, hint, wide)
		if err != nil {
			rep.Finish()
			return nil, err
		}
		prev0 := prev
		cur, prev = next, now
		if wide {
			hint = next.smoothing
		}
		rd.Nodes, rd.Smoothing, rd.SmoothingZ = next.nodes, next.smoothing[0], next.smoothing[1]
		rd.LandmarkRMS = rms(next.loo[:p.Len()])
		res.Rounds = append(res.Rounds, rd)
		// The next round's matches are judged with radii calibrated to
		// this fit: its own estimate of the scale makes them too wide,
		// and fewer pairs look clear than are.
		err = r.calibrate(cur, 1)
		rep.Finish()
		if err != nil {
			return nil, err
		}
		if mapper, err = r.mapper(cur); err != nil {
			return nil, err
		}
		// Stable: at most a few pairs changed (proposals counted among
		// them), or the same pairs as two rounds ago (a few at the
		// threshold may go out and come back in turn). The rounds stop
		// there when no pair waits for the spline to confirm it; else one
		// more round, proposing nothing, confirms or drops the last
		// proposals, and proposals end.
		stable := threshold == opt.MinP && round >= len(startP) &&
			rd.Changed()+proposed <= max(stableLeast, int(stableShare*float64(len(pairs))))
		if stable || samePairs(now, before) {
			if proposed == 0 {
				break
			}
			confirming = true
		}
		before = prev0
	}
	if cur == nil {
		// No pair was clear: the landmark fit stands, and says so.
		res.LandmarkAfter = append([]float64(nil), res.LandmarkBefore...)
		res.Uncertainty = r.base
		res.Scale = a.Scale
		return res, nil
	}
	rep.Step("refining: calibrating the uncertainty (matchings)", 0)
	err = r.calibrate(cur, calibrationRounds)
	rep.Finish()
	if err != nil {
		return nil, err
	}
	if err := r.inflateLocally(cur); err != nil {
		return nil, err
	}
	r.finish(res, cur)
	return res, nil
}

func (o Options) withDefaults() (Options, error) {
	if o.CandidateSD == 0 {
		o.CandidateSD = match.DefaultCandidateSD
	}
	if !(o.CandidateSD > 0) || math.IsInf(o.CandidateSD, 0) {
		return o, fmt.Errorf("refine: candidate standard deviation %v µm, want a positive number", o.CandidateSD)
	}
	if o.MinP == 0 {
		o.MinP = DefaultMinP
	}
	if !(o.MinP > 0.5 && o.MinP < 1) {
		return o, fmt.Errorf("refine: least probability of a pair %v, want a number in (0.5, 1)", o.MinP)
	}
	if o.MaxRounds == 0 {
		o.MaxRounds = DefaultMaxRounds
	}
	if o.MaxNodes == 0 {
		o.MaxNodes = DefaultMaxNodes
	}
	if o.MaxRounds < 1 || o.MaxNodes < 1 {
		return o, errors.New("refine: rounds and nodes must be positive")
	}
	return o, nil
}

// refiner holds what the rounds share.
type refiner struct {
	in         Input
	opt        Options
	a          *register.Assessment
	base       *register.UncertaintyModel
	dim        int
	radii      *register.RadiusTable
	pairWeight float64
	// rep counts the matchings and spline fits of the current stage.
	rep progress.Reporter
	// cand are the candidates near the somata (indices into the input's),
	// candPos and candIDs their positions and ids.
	cand    []int
	candPos []transform.Vec
	candIDs []string
	// dec are the input's decisions with the candidates indexed into cand.
	dec *match.Decisions
	// proposed are the somata already looked for at the offset their
	// neighbours agreed on: each is proposed once, and its pair stays only
	// while the spline refitted with it matches it where it maps the soma.
	proposed map[int]bool
}

// landmarkNoise is the landmarks' noise variance per target axis (µm²):
// from the stated picking errors, else the noise part of the landmark
// model's scale (its nugget s·S for the spline, all of it for a linear
// model, as register's uncertainty model takes it).
func (r *refiner) landmarkNoise() transform.Vec {
	jac := r.a.Result.Transform.Jacobian(centroid(r.in.Landmarks.Source))
	s := r.opt.Settings
	var n transform.Vec
	if s.SourceSD != nil || s.TargetSD != nil {
		for k := range r.dim {
			if s.SourceSD != nil {
				for l := range r.dim {
					n[k] += jac[k][l] * jac[k][l] * s.SourceSD[l] * s.SourceSD[l]
				}
			}
			if s.TargetSD != nil {
				n[k] += s.TargetSD[k] * s.TargetSD[k]
			}
		}
		return n
	}
	for k := range r.dim {
		n[k] = r.base.Scale[k] * r.base.NoiseFactor
	}
	return n
}

// pairNoise is a pair's noise variance per target axis (µm²): the soma's
// localisation error carried through the landmark fit's Jacobian and the
// candidate's spread about the soma centre.
func (r *refiner) pairNoise() transform.Vec {
	var n transform.Vec
	cell := r.opt.CellSD
	if cell == nil {
		n = r.landmarkNoise()
	} else {
		jac := r.a.Result.Transform.Jacobian(centroid(r.in.Landmarks.Source))
		for k := range r.dim {
			for l := range r.dim {
				n[k] += jac[k][l] * jac[k][l] * cell[l] * cell[l]
			}
		}
	}
	for k := range r.dim {
		n[k] += r.opt.CandidateSD * r.opt.CandidateSD
	}
	return n
}

// minNoiseUM2 keeps a weight finite when the landmarks fit exactly.
const minNoiseUM2 = 0.01

// relativePairWeight is the precision of a pair over that of a landmark of
// weight 1, from their noise variances summed over the axes.
func (r *refiner) relativePairWeight() float64 {
	l, p := r.landmarkNoise(), r.pairNoise()
	sl, sp := 0.0, 0.0
	for k := range r.dim {
		sl += l[k]
		sp += p[k]
	}
	return math.Max(sl, minNoiseUM2) / math.Max(sp, minNoiseUM2)
}

// choosePairs matches every soma under mapper and keeps the clear pairs:
// matched one to one with posterior probability at least threshold, the
// runner-up below 1 − threshold, the mapping not folded. With propose, a
// soma not proposed before whose neighbours agree that the fit maps it off
// is matched where they put it (constellation.go); proposed counts the
// pairs found so.
func (r *refiner) choosePairs(mapper *register.Mapper, threshold float64, propose bool) (pairs []Pair, proposed int, err error) {
	mapped := mapper.MapAll(r.in.Somata, r.opt.CellSD, false)
	var shift []transform.Vec
	var apply []bool
	if propose {
		shift, apply = r.localShifts(mapped)
		for i := range mapped {
			if apply[i] && !r.proposed[i] {
				mapped[i].Pos = mapped[i].Pos.Add(shift[i])
			} else {
				apply[i] = false
			}
		}
	}
	res, err := match.MatchMapped(mapped, r.candPos, match.Options{
		Dim: r.dim, CandidateSD: r.opt.CandidateSD, MinPMatch: threshold,
		CellIDs: r.in.SomaIDs, CandidateIDs: r.candIDs, Decisions: r.dec,
	})
	r.rep.Add(1)
	if err != nil {
		return nil, 0, err
	}
	for i, m := range res {
		// A decided soma is never a pair: accepted, it is a landmark
		// already; with no counterpart, it has none.
		if m.Decision != "" {
			continue
		}
		if m.Status != status.Matched || m.PMatch < threshold || m.PRunnerUp > 1-threshold {
			continue
		}
		if apply != nil && apply[i] {
			if r.proposed == nil {
				r.proposed = map[int]bool{}
			}
			r.proposed[i] = true
			proposed++
		}
		j := r.cand[m.Candidate]
		pairs = append(pairs, Pair{Soma: i, Candidate: j, P: m.PMatch,
			Source: r.in.Somata[i], Target: r.in.Candidates[j]})
	}
	return pairs, proposed, nil
}

// mapper builds the mapper that map and match would read from the
// transform file of fit (the landmark fit when nil).
func (r *refiner) mapper(fit *fitState) (*register.Mapper, error) {
	f := &register.Registration{Transform: r.a.Result.Transform, Uncertainty: r.base}
	if fit != nil {
		f.Transform, f.Uncertainty = fit.transform, fit.uncertainty
		raw, err := heldOutJSON(fit.heldOut)
		if err != nil {
			return nil, err
		}
		f.Refinement = raw
	}
	m, err := register.NewMapper(f)
	if err != nil {
		return nil, fmt.Errorf("refine: %w", err)
	}
	return m, nil
}

// finish fills the result from the last fit.
func (r *refiner) finish(res *Result, fit *fitState) {
	nl := r.in.Landmarks.Len()
	res.Transform, res.Smoothing, res.SmoothingZ = fit.transform, fit.smoothing[0], fit.smoothing[1]
	res.Nodes, res.Targets, res.Weights = fit.src, fit.dst, fit.weights
	res.Scale, res.Uncertainty, res.HeldOut = fit.scale, fit.uncertainty, fit.heldOut
	for _, e := range fit.loo[:nl] {
		res.LandmarkAfter = append(res.LandmarkAfter, e.Norm())
	}
	res.Pairs = fit.pairs
	for _, pr := range res.Pairs {
		res.PairCalibration.N++
		if pr.LOO.Norm() <= pr.R95 {
			res.PairCalibration.Inside++
		}
	}
	// The flagged landmarks are left out of the comparison: predicting a
	// wrong landmark worse is no fault.
	var before, after []float64
	for i, l := range r.a.Landmarks {
		if l.Flag == "" {
			before = append(before, res.LandmarkBefore[i])
			after = append(after, res.LandmarkAfter[i])
		}
	}
	res.Worse, res.WorseReason = worse(before, after)
	if !res.Worse {
		res.Worse, res.WorseReason = pairBias(res.Pairs, r.dim)
	}
}

// pairBiasUM is the mean offset (µm, along any axis) of the pairs'
// leave-one-out errors from which pairBias refuses, when it is also beyond
// pairBiasSEs standard errors of that mean.
const (
	pairBiasUM  = 1.0
	pairBiasSEs = 4.0
)

// pairBias refuses a refinement whose pairs disagree with the fit as a
// whole: their held-out errors (candidate minus the prediction without the
// pair) should scatter about zero; a common offset along an axis says the
// candidates are offset from the landmarks (two exports placed apart, a
// nucleus centre taken off its soma's) and the pairs were found at that
// offset rather than confirming the landmarks' map.
func pairBias(pairs []Pair, dim int) (bool, string) {
	var sum, sq transform.Vec
	n := 0
	for _, pr := range pairs {
		if !pr.Node {
			continue
		}
		n++
		for a := range dim {
			sum[a] += pr.LOO[a]
			sq[a] += pr.LOO[a] * pr.LOO[a]
		}
	}
	if n < minPairsForScale {
		return false, ""
	}
	var mean transform.Vec
	biased := false
	for a := range dim {
		mean[a] = sum[a] / float64(n)
		v := (sq[a] - float64(n)*mean[a]*mean[a]) / float64(n-1)
		se := math.Sqrt(math.Max(v, 0) / float64(n))
		if math.Abs(mean[a]) > pairBiasUM && math.Abs(mean[a]) > pairBiasSEs*se {
			biased = true
		}
	}
	if !biased {
		return false, ""
	}
	return true, fmt.Sprintf("the pairs fit the refined transform worse than noise allows: their leave-one-out errors are offset by (%.2f, %.2f, %.2f) µm on average over %d pairs, so the candidates sit apart from where the landmarks put the somata (a shift between the exports, or candidate centres off the somata's)",
		mean[0], mean[1], mean[2], n)
}

// worse compares the landmarks' leave-one-out errors before and after by
// the paired difference of their squares: the refinement is worse when the
// mean square grew by more than one standard error of that difference, the
// margin of the one-standard-error rule that chose the landmark model.
func worse(before, after []float64) (bool, string) {
	if len(before) != len(after) || len(before) == 0 {
		return false, ""
	}
	d := make([]float64, len(before))
	mean := 0.0
	for i := range d {
		d[i] = after[i]*after[i] - before[i]*before[i]
		mean += d[i]
	}
	mean /= float64(len(d))
	ss := 0.0
	for _, x := range d {
		ss += (x - mean) * (x - mean)
	}
	se := math.Inf(1)
	if len(d) > 1 {
		se = math.Sqrt(ss / float64(len(d)-1) / float64(len(d)))
	}
	if mean > 0 && mean > se {
		return true, fmt.Sprintf("the refined transform predicts the landmarks worse: leave-one-out RMS %.2f µm against %.2f µm from the landmarks alone (the mean squared error grew by %.2f µm², more than its standard error %.2f µm²)",
			rmsOf(after), rmsOf(before), mean, se)
	}
	// The mean square follows the few largest errors; a refinement that
	// pulls the map off the landmarks a little everywhere (nuclei offset
	// from the somata, say) shows instead as most landmarks predicted
	// worse. The sign test (Dixon & Mood 1946) asks whether more of them
	// grew than chance allows, one-sided at signTestLevel.
	grew, shrank := 0, 0
	for _, x := range d {
		switch {
		case x > 0:
			grew++
		case x < 0:
			shrank++
		}
	}
	if n := grew + shrank; n > 0 && grew > shrank {
		p := distuv.Binomial{N: float64(n), P: 0.5}.Survival(float64(grew - 1))
		if p < signTestLevel {
			sort.Float64s(before)
			sort.Float64s(after)
			return true, fmt.Sprintf("the refined transform predicts the landmarks worse: %d of %d landmarks are predicted worse (sign test p = %.2g), median leave-one-out error %.2f µm against %.2f µm from the landmarks alone",
				grew, n, p, median(after), median(before))
		}
	}
	return false, ""
}

// signTestLevel is the one-sided level of worse's sign test: strict, since
// a refinement refused wrongly loses its gains, and most refinements move
// every landmark's prediction a little either way.
const signTestLevel = 0.01

func median(sorted []float64) float64 {
	n := len(sorted)
	if n%2 == 1 {
		return sorted[n/2]
	}
	return (sorted[n/2-1] + sorted[n/2]) / 2
}

func rms(v []transform.Vec) float64 {
	s := 0.0
	for _, x := range v {
		s += x.Dot(x)
	}
	return math.Sqrt(s / float64(max(len(v), 1)))
}

func rmsOf(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x * x
	}
	return math.Sqrt(s / float64(max(len(v), 1)))
}

func centroid(points []transform.Vec) transform.Vec {
	var c transform.Vec
	for _, p := range points {
		c = c.Add(p)
	}
	return c.Scale(1 / float64(max(len(points), 1)))
}

// sortPairs orders pairs by soma.
func sortPairs(pairs []Pair) {
	sort.Slice(pairs, func(i, j int) bool { return pairs[i].Soma < pairs[j].Soma })
}

// samePairs reports that two sets of pairs (soma to candidate) are equal.
func samePairs(a, b map[int]int) bool {
	if a == nil || b == nil || len(a) != len(b) {
		return false
	}
	for s, c := range a {
		if d, ok := b[s]; !ok || d != c {
			return false
		}
	}
	return true
}
