package refine

import (
	"errors"
	"fmt"
	"math"

	"ferry/progress"
	"ferry/register"
	"ferry/register/match"
	"ferry/transform"
)

// The defaults of Options, stated in docs/methods.md.
const (
	// DefaultMinP is the posterior probability from which a pair becomes a
	// pseudo-landmark in the last rounds: that from which match calls a
	// cell matched. A stricter threshold keeps the pairs out of exactly the
	// regions the fit maps worst (a right pair's probability falls where
	// its soma is mapped off), so the spline never learns the warp there;
	// a pair let in is confirmed each round by the spline refitted without
	// it (the held-out prediction) or dropped.
	DefaultMinP = match.DefaultMinPMatch
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
