package refine

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"ferry/landmarks"
	"ferry/register"
	"ferry/transform"
)

// A cell whose pair is a node of the refined spline is mapped, through the
// transform file as map and match read it, to its exact leave-one-out
// prediction: the spline refitted without that pair (same smoothing and
// weights) and evaluated at the cell. Its own pair does not vouch for it.
func TestHeldOutCellIsPredictedWithoutItsPair(t *testing.T) {
	s := newScenario(smallParams(warpBumps), 2)
	_, _, res := runScenario(t, s)
	if len(res.HeldOut) < 100 {
		t.Fatalf("only %d held-out cells", len(res.HeldOut))
	}
	f := refinedFile(t, s, res)
	m, err := register.NewMapper(f)
	if err != nil {
		t.Fatal(err)
	}
	sp := res.Transform.(*transform.Spline)
	// The node pairs' entries come first; the entries after them are
	// somata whose factor the local calibration widened, predicted by the
	// refined spline itself (they are not in the fit).
	nodes := 0
	for _, pr := range res.Pairs {
		if pr.Node {
			nodes++
		}
	}
	for _, h := range res.HeldOut[nodes:] {
		if got, want := m.Map(h.Source, nil).Pos, res.Transform.Apply(h.Source); got.Sub(want).Norm() > 1e-9 {
			t.Errorf("soma %s, not a node, mapped to %v, want the spline's %v", h.ID, got, want)
		}
		for _, x := range res.Nodes {
			if x == h.Source {
				t.Errorf("soma %s has a widened entry but is a node", h.ID)
			}
		}
	}
	for _, k := range []int{0, nodes / 2, nodes - 1} {
		h := res.HeldOut[k]
		got := m.Map(h.Source, nil).Pos
		// Refit without the node.
		var src, dst []transform.Vec
		var w []float64
		node := -1
		for i, x := range res.Nodes {
			if x == h.Source {
				node = i
				continue
			}
			src, dst, w = append(src, x), append(dst, res.Targets[i]), append(w, res.Weights[i])
		}
		if node < 0 {
			t.Fatalf("held-out cell %s is not a node", h.ID)
		}
		// The spline's weights are relative to their mean, which leaving a
		// node out changes: scale S so that every other node keeps its
		// penalty S·w̄/w_i.
		all := mean(res.Weights)
		rest := mean(w)
		// x and y are smoothed with S, z with its own.
		var want transform.Vec
		for _, axes := range []struct {
			sm   float64
			axes []int
		}{{sp.Smoothing, []int{0, 1}}, {res.SmoothingZ, []int{2}}} {
			loo, err := transform.Fit(transform.TPS, 3, src, dst, transform.Options{Weights: w, Smoothing: axes.sm * all / rest})
			if err != nil {
				t.Fatal(err)
			}
			y := loo.Transform.Apply(h.Source)
			for _, a := range axes.axes {
				want[a] = y[a]
			}
		}
		if d := got.Sub(want).Norm(); d > 1e-6 {
			t.Errorf("cell %s mapped to %v, the fit without its pair predicts %v (%.3g µm apart)", h.ID, got, want, d)
		}
		if d := got.Sub(res.Transform.Apply(h.Source)).Norm(); d < 1e-9 {
			t.Errorf("cell %s is mapped by the fit that holds its own pair", h.ID)
		}
	}
}

func mean(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}

func refinedFile(t testing.TB, s *scenario, res *Result) *register.Registration {
	t.Helper()
	sd := s.Params.CellSD
	opt := Options{CellSD: &sd, CandidateSD: s.Params.NucleusSD}
	f, err := res.File(baseFile(t, s, res.Landmark), res.Record(s.input(), opt, nil))
	if err != nil {
		t.Fatal(err)
	}
	data, err := f.Marshal()
	if err != nil {
		t.Fatal(err)
	}
	back, err := register.ReadRegistration(bytes.NewReader(data), "refined.json")
	if err != nil {
		t.Fatal(err)
	}
	return back
}

// smallParams is a quick scenario: 250 cells, 48 landmarks, a smaller block.
func smallParams(w warpKind) scenarioParams {
	pr := defaultParams(w, 48, 1)
	pr.Size = transform.Vec{400, 400, 250}
	pr.Cells = 250
	return pr
}

// The landmarks are independent evidence: when the candidates disagree with
// them (here every nucleus is shifted by 3 µm in x, as a wrong offset
// between two exports would do), the refinement predicts them worse and is
// refused.
func TestRefinementThatPredictsLandmarksWorseIsRefused(t *testing.T) {
	s := newScenario(smallParams(warpPolynomial), 3)
	for j := range s.Candidates {
		s.Candidates[j][0] += 3
	}
	sd := s.Params.CellSD
	res, err := Refine(s.input(), Options{CellSD: &sd, CandidateSD: s.Params.NucleusSD})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Pairs) == 0 {
		t.Fatal("no pair found: the shift is too large for this test")
	}
	if !res.Worse || !strings.Contains(res.WorseReason, "worse") {
		t.Errorf("refinement against shifted candidates not refused: landmark RMS %.2f → %.2f µm", rmsOf(res.LandmarkBefore), rmsOf(res.LandmarkAfter))
	}
}

func TestWorse(t *testing.T) {
	tests := []struct {
		name          string
		before, after []float64
		want          bool
	}{
		{"better", []float64{2, 3, 2, 4}, []float64{1.5, 2.5, 2, 3}, false},
		{"the same", []float64{2, 3, 2, 4}, []float64{2, 3, 2, 4}, false},
		{"one worse within noise", []float64{2, 3, 2, 4, 1, 2}, []float64{2, 3.5, 1.8, 3.9, 1, 2}, false},
		{"all worse", []float64{2, 3, 2, 4}, []float64{3, 4, 3, 5}, true},
	}
	for _, tc := range tests {
		if got, _ := worse(tc.before, tc.after); got != tc.want {
			t.Errorf("%s: worse %v, want %v", tc.name, got, tc.want)
		}
	}
}

// The record states the rounds, pairs and landmark errors; the pairs'
// leave-one-out errors are calibrated (about 95 % inside their radius),
// with the scale re-estimated as coherent point drift re-estimates its σ²
// (Myronenko & Song 2010, IEEE TPAMI 32(12):2262–2275).
func TestRecord(t *testing.T) {
	s := newScenario(smallParams(warpCompression), 4)
	_, _, res := runScenario(t, s)
	sd := s.Params.CellSD
	rec := res.Record(s.input(), Options{CellSD: &sd}, []register.Input{{Path: "cells.csv", SHA256: "ab"}})
	if rec.PairsUsed != len(res.Pairs) || rec.PairsUsed == 0 || rec.Iterations != len(res.Rounds) {
		t.Errorf("record: %d pairs, %d iterations; result %d, %d", rec.PairsUsed, rec.Iterations, len(res.Pairs), len(res.Rounds))
	}
	if len(rec.Landmarks) != s.Landmarks.Len() || math.IsNaN(rec.LandmarkRMSAfter) {
		t.Errorf("record: %d landmarks, RMS after %v", len(rec.Landmarks), rec.LandmarkRMSAfter)
	}
	if sh := rec.PairCalibration.Share; sh < 0.85 || sh > 0.995 {
		t.Errorf("pairs' calibration %.3f, want near 0.95", sh)
	}
	var b strings.Builder
	if err := WritePairs(&b, rec, 3, register.Voxels{}); err != nil {
		t.Fatal(err)
	}
	// The header row comes first, as in every table ferry writes.
	lines := strings.Split(strings.TrimSpace(b.String()), "\n")
	if len(lines) != rec.PairsUsed+1 || !strings.HasPrefix(lines[0], "id,kind,source_x,source_y,source_z,target_x,target_y,target_z,cell,candidate,p_match") {
		t.Errorf("pairs file: %d lines, header %q", len(lines), lines[0])
	}
	if !strings.Contains(lines[1], ",soma,") {
		t.Errorf("pair row %q is not of kind soma", lines[1])
	}
}

// In 2-D (a single plane imaged on both sides) the refinement runs as in
// 3-D, and gains: the held-out cells land nearer their truth than under the
// landmark fit.
func TestRefine2D(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	warp := func(x transform.Vec) transform.Vec {
		return transform.Vec{1.02*x[0] + 0.05*x[1] + 100 + 4*math.Sin(x[0]/70), -0.04*x[0] + 0.97*x[1] + 50 + 3*math.Cos(x[1]/80), 0}
	}
	p := &register.Problem{Dim: 2}
	for i := range 25 {
		x := transform.Vec{500 * rng.Float64(), 500 * rng.Float64(), 0}
		y := warp(x)
		p.IDs = append(p.IDs, fmt.Sprintf("L%d", i))
		p.Kinds = append(p.Kinds, landmarks.KindVessel)
		p.Source = append(p.Source, transform.Vec{x[0] + 0.5*rng.NormFloat64(), x[1] + 0.5*rng.NormFloat64(), 0})
		p.Target = append(p.Target, transform.Vec{y[0] + 0.3*rng.NormFloat64(), y[1] + 0.3*rng.NormFloat64(), 0})
	}
	g := newGapGrid(10)
	var somata []transform.Vec
	for len(somata) < 1500 {
		x := transform.Vec{-20 + 540*rng.Float64(), -20 + 540*rng.Float64(), 0}
		if g.free(x) {
			g.add(x)
			somata = append(somata, x)
		}
	}
	in := Input{Landmarks: p}
	var truth []transform.Vec
	for j, x := range somata {
		y := warp(x)
		in.Candidates = append(in.Candidates, transform.Vec{y[0] + rng.NormFloat64(), y[1] + rng.NormFloat64(), 0})
		in.CandidateIDs = append(in.CandidateIDs, fmt.Sprintf("n%d", j))
		if x[0] > 0 && x[0] < 500 && x[1] > 0 && x[1] < 500 && len(in.Somata) < 300 {
			in.Somata = append(in.Somata, transform.Vec{x[0] + 0.5*rng.NormFloat64(), x[1] + 0.5*rng.NormFloat64(), 0})
			in.SomaIDs = append(in.SomaIDs, fmt.Sprintf("c%d", len(in.SomaIDs)))
			truth = append(truth, y)
		}
	}
	sd := transform.Vec{0.5, 0.5, 0}
	res, err := Refine(in, Options{CellSD: &sd, CandidateSD: 1})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Pairs) < 150 || res.Worse {
		t.Fatalf("%d pairs, worse %v", len(res.Pairs), res.Worse)
	}
	errOf := func(tr transform.Transform, u *register.UncertaintyModel, held []register.HeldOut) float64 {
		f := &register.Registration{Transform: tr, Uncertainty: u}
		var err error
		if f.Refinement, err = heldOutJSON(held); err != nil {
			t.Fatal(err)
		}
		m, err := register.NewMapper(f)
		if err != nil {
			t.Fatal(err)
		}
		var e []float64
		for i, x := range in.Somata {
			e = append(e, m.Map(x, &sd).Pos.Sub(truth[i]).Norm())
		}
		return medianOf(e)
	}
	before := errOf(res.Landmark.Result.Transform, register.NewUncertaintyModel(p, res.Landmark, register.Settings{}), nil)
	after := errOf(res.Transform, res.Uncertainty, res.HeldOut)
	t.Logf("2-D: %d pairs; median error %.2f µm before, %.2f µm after", len(res.Pairs), before, after)
	if !(after < before) {
		t.Errorf("median error %.2f µm after refining, %.2f µm before", after, before)
	}
}

// recorder counts what a progress.Reporter is told.
type recorder struct {
	steps []string
	adds  int
}

func (r *recorder) Step(name string, total int) { r.steps = append(r.steps, name) }
func (r *recorder) Add(n int)                   { r.adds += n }
func (r *recorder) Finish()                     {}

// Refine reports its rounds, and the fits and matchings within them, so
// that a terminal shows a bar for a long refinement.
func TestRefineReportsProgress(t *testing.T) {
	s := newScenario(smallParams(warpBumps), 5)
	sd := s.Params.CellSD
	rec := &recorder{}
	res, err := Refine(s.input(), Options{CellSD: &sd, CandidateSD: s.Params.NucleusSD, Progress: rec})
	if err != nil {
		t.Fatal(err)
	}
	if len(rec.steps) < len(res.Rounds) || rec.adds < 2*len(res.Rounds) {
		t.Errorf("%d rounds, but %d stages and %d units reported", len(res.Rounds), len(rec.steps), rec.adds)
	}
}
