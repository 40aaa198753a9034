package refine

import (
	"encoding/json"
	"math"
	"sort"

	"ferry/register"
	"ferry/transform"
)

// MethodName identifies the refinement record's layout.
const MethodName = "soma correspondences, annealed, thin-plate spline with exact leave-one-out"

// Record is the refinement record kept in the transform file (its
// "refinement" field): how the transform was refined, what it gained, and
// the held-out predictions that map and match read. docs/formats.md
// describes every field.
type Record struct {
	Method     string           `json:"method"`
	Inputs     []register.Input `json:"inputs"`
	CellSD     *transform.Vec   `json:"cell_sd_um,omitempty"`
	CandSD     float64          `json:"candidate_sd_um"`
	MinP       float64          `json:"min_p"`
	Somata     int              `json:"somata"`
	Candidates int              `json:"candidates"`
	PairsUsed  int              `json:"pairs_used"`
	PairNodes  int              `json:"pair_nodes"`
	MaxNodes   int              `json:"max_nodes"`
	Iterations int              `json:"iterations"`
	Rounds     []Round          `json:"rounds"`
	PairWeight float64          `json:"pair_weight"`
	Smoothing  float64          `json:"smoothing"`
	SmoothingZ float64          `json:"smoothing_z"`
	// Landmarks are the landmarks' leave-one-out errors before and after.
	Landmarks         []LandmarkLOO `json:"landmarks"`
	LandmarkRMSBefore float64       `json:"landmark_loo_rms_before_um"`
	LandmarkRMSAfter  float64       `json:"landmark_loo_rms_after_um"`
	LandmarkMedBefore float64       `json:"landmark_loo_median_before_um"`
	LandmarkMedAfter  float64       `json:"landmark_loo_median_after_um"`
	// PairLOO summarises the pairs' leave-one-out errors, PairCalibration
	// how many fall inside their 95 % radius.
	PairLOOMedian   float64            `json:"pair_loo_median_um"`
	PairLOOP95      float64            `json:"pair_loo_p95_um"`
	PairCalibration CalibrationJSON    `json:"pair_calibration"`
	Pairs           []PairJSON         `json:"pairs"`
	HeldOut         []register.HeldOut `json:"held_out"`
}

// LandmarkLOO is one landmark's leave-one-out error before and after.
type LandmarkLOO struct {
	ID     string  `json:"id"`
	Before float64 `json:"loo_before_um"`
	After  float64 `json:"loo_after_um"`
}

// CalibrationJSON counts errors inside their predicted 95 % radius.
type CalibrationJSON struct {
	Inside int     `json:"inside_r95"`
	N      int     `json:"pairs"`
	Share  float64 `json:"share"`
}

// PairJSON is one correspondence relied on.
type PairJSON struct {
	Cell      string        `json:"cell"`
	Candidate string        `json:"candidate"`
	P         float64       `json:"p_match"`
	Source    transform.Vec `json:"source_um"`
	Target    transform.Vec `json:"target_um"`
	Node      bool          `json:"node"`
	LOOError  float64       `json:"loo_error_um"`
	R95       float64       `json:"r95_um"`
}

// Record builds the refinement record of a result.
func (res *Result) Record(in Input, opt Options, inputs []register.Input) Record {
	opt, _ = opt.withDefaults()
	rec := Record{
		Method: MethodName, Inputs: inputs, CellSD: opt.CellSD, CandSD: opt.CandidateSD, MinP: opt.MinP,
		Somata: len(in.Somata), Candidates: len(in.Candidates), MaxNodes: opt.MaxNodes,
		Iterations: len(res.Rounds), Rounds: res.Rounds, PairWeight: res.PairWeight, Smoothing: res.Smoothing, SmoothingZ: res.SmoothingZ,
		PairsUsed: len(res.Pairs), HeldOut: res.HeldOut,
	}
	if rec.Rounds == nil {
		rec.Rounds = []Round{}
	}
	if rec.HeldOut == nil {
		rec.HeldOut = []register.HeldOut{}
	}
	for i, id := range in.Landmarks.IDs {
		rec.Landmarks = append(rec.Landmarks, LandmarkLOO{ID: id, Before: res.LandmarkBefore[i], After: res.LandmarkAfter[i]})
	}
	rec.LandmarkRMSBefore, rec.LandmarkRMSAfter = rmsOf(res.LandmarkBefore), rmsOf(res.LandmarkAfter)
	rec.LandmarkMedBefore, rec.LandmarkMedAfter = medianOf(res.LandmarkBefore), medianOf(res.LandmarkAfter)
	var errs []float64
	rec.Pairs = []PairJSON{}
	for _, pr := range res.Pairs {
		if pr.Node {
			rec.PairNodes++
		}
		e := pr.LOO.Norm()
		errs = append(errs, e)
		rec.Pairs = append(rec.Pairs, PairJSON{
			Cell: in.SomaIDs[pr.Soma], Candidate: in.CandidateIDs[pr.Candidate], P: pr.P,
			Source: pr.Source, Target: pr.Target, Node: pr.Node, LOOError: e, R95: pr.R95,
		})
	}
	if len(errs) > 0 {
		rec.PairLOOMedian = medianOf(errs)
		rec.PairLOOP95 = quantileOf(errs, 0.95)
	}
	c := res.PairCalibration
	rec.PairCalibration = CalibrationJSON{Inside: c.Inside, N: c.N, Share: c.Share()}
	if c.N == 0 {
		rec.PairCalibration.Share = 0
	}
	return rec
}

// File is the registration of the refined fit: base (the landmark fit, with
// its provenance and leave-one-out check of the landmarks) with the refined
// transform, its uncertainty model and the record.
func (res *Result) File(base *register.Registration, rec Record) (*register.Registration, error) {
	f := *base
	f.Transform, f.Smoothing = res.Transform, res.Smoothing
	f.Uncertainty = res.Uncertainty
	var err error
	if f.Refinement, err = json.Marshal(rec); err != nil {
		return nil, err
	}
	return &f, nil
}

func medianOf(v []float64) float64 { return quantileOf(v, 0.5) }

// quantileOf is the q-quantile of v by linear interpolation between order
// statistics; NaN for no values.
func quantileOf(v []float64, q float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	h := q * float64(len(s)-1)
	i := int(math.Floor(h))
	if i+1 >= len(s) {
		return s[len(s)-1]
	}
	return s[i] + (h-float64(i))*(s[i+1]-s[i])
}
