package refine

import (
	"bytes"
	"flag"
	"math"
	"testing"

	"ferry/register"
	"ferry/register/match"
	"ferry/status"
)

// evaluate maps and matches the scenario's cells as map and match would
// with the transform file f, and scores them against the truth.
func evaluate(t testing.TB, s *scenario, f *register.Registration) scores {
	t.Helper()
	m, err := register.NewMapper(f)
	if err != nil {
		t.Fatal(err)
	}
	sd := s.Params.CellSD
	res, err := match.Match(m, s.Cells, &sd, s.Candidates, match.Options{CandidateSD: s.Params.NucleusSD, CellIDs: s.CellIDs, CandidateIDs: s.CandIDs})
	if err != nil {
		t.Fatal(err)
	}
	var sc scores
	var errs []float64
	right, withCounterpart, inside := 0, 0, 0
	for i, r := range res {
		e := r.Mapped.Pos.Sub(s.CellTruth[i]).Norm()
		errs = append(errs, e)
		if e <= r.Mapped.R95 {
			inside++
		}
		if s.Counterpart[i] >= 0 {
			withCounterpart++
		}
		switch r.Status {
		case status.Matched:
			sc.Matched++
			if r.Candidate == s.Counterpart[i] {
				right++
			}
		case status.Ambiguous:
			sc.Ambiguous++
		}
	}
	sc.Recall = float64(right) / float64(max(withCounterpart, 1))
	sc.Precision = float64(right) / float64(max(sc.Matched, 1))
	sc.MedianUM = quantile(errs, 0.5)
	sc.P95UM = quantile(errs, 0.95)
	sc.Coverage = float64(inside) / float64(len(errs))
	return sc
}

// baseFile is the transform file fit would write for the scenario.
func baseFile(t testing.TB, s *scenario, a *register.Assessment) *register.Registration {
	t.Helper()
	u := register.NewUncertaintyModel(s.Landmarks, a, register.Settings{Smoothing: register.Smoothing{Auto: true}})
	return &register.Registration{Transform: a.Result.Transform, Smoothing: a.Smoothing, Uncertainty: u,
		Landmarks: register.LandmarkSource{Path: "landmarks.csv", SHA256: "0"}}
}

// runScenario refines a scenario and scores the landmark fit and the
// refined fit.
func runScenario(t testing.TB, s *scenario) (before, after scores, res *Result) {
	return refineAndScore(t, s, true)
}

// refineAndScore refines s and scores the refined fit, and the landmark fit
// too when withBefore.
func refineAndScore(t testing.TB, s *scenario, withBefore bool) (before, after scores, res *Result) {
	t.Helper()
	sd := s.Params.CellSD
	opt := Options{Settings: register.Settings{Smoothing: register.Smoothing{Auto: true}}, CellSD: &sd, CandidateSD: s.Params.NucleusSD}
	res, err := Refine(s.input(), opt)
	if err != nil {
		t.Fatal(err)
	}
	base := baseFile(t, s, res.Landmark)
	if withBefore {
		before = evaluate(t, s, base)
	}
	f, err := res.File(base, res.Record(s.input(), opt, nil))
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
	after = evaluate(t, s, back)
	return before, after, res
}

var (
	refineSeeds     = flag.Int("refine-seeds", 2, "seeds per scenario of TestRefineFamilies")
	refineFirstSeed = flag.Int("refine-first-seed", 1, "first seed of TestRefineFamilies")
	refineWarp      = flag.String("refine-warp", "", "run TestRefineFamilies on this warp kind only (polynomial, bumps, compression, shear)")
	refineLandmarks = flag.Int("refine-landmarks", 0, "run TestRefineFamilies on the configuration with this many landmarks only (48 or 24)")
)

// TestRefineFamilies refines scenarios of our own making (scenario_test.go:
// four warp kinds; 48 landmarks with in vivo z sd 1 µm, 24 landmarks with z
// sd 3 µm; 5 % of the cells without a counterpart) and holds the refined
// registration, in every family, to the targets of docs/refine.md and to
// what it reached there (seeds 1–3, 2026-12-02): with 48 landmarks mean
// recall ≥ 0.97 (the sheared sections reached 0.976 over seeds 1–3, 0.986
// over the default seeds 1–2) at precision ≥ 0.995 in every scenario and
// median error ≤ 1.8 µm (target 2.1); with 24 landmarks and z sd 3 µm mean
// recall ≥ 0.90 (target 0.85; the sheared sections reached 0.939) at
// precision ≥ 0.99 in every scenario and median
// error ≤ 2.8 µm (target 3.0); in every scenario the 95 % radius holds
// 90–99 % of the true positions, and the landmarks are not predicted
// worse. Run with -v to see the figures, -refine-seeds=N for more
// seeds (from -refine-first-seed), and -refine-warp and -refine-landmarks
// to run one family.
//
// The methods under test: annealed correspondences with an outlier option
// and a thin-plate spline after robust point matching (Chui & Rangarajan
// 2003, Computer Vision and Image Understanding 89(2–3):114–141), the
// scale re-estimated from the posterior-weighted errors as in the σ² step
// of coherent point drift (Myronenko & Song 2010, IEEE TPAMI
// 32(12):2262–2275), pairs proposed by a local Hough vote over translations
// (Ballard 1981, Pattern Recognition 13(2):111–122) and the radii widened
// by a local calibration on the pairs' held-out errors (Lei et al. 2018,
// JASA 113(523):1094–1111); the coverage figures check the last two.
func TestRefineFamilies(t *testing.T) {
	if testing.Short() {
		t.Skip("Monte Carlo evaluation: about a minute")
	}
	type config struct {
		landmarks         int
		zSD               float64
		recall, precision float64
		medianUM          float64
	}
	configs := []config{{48, 1, 0.97, 0.995, 1.8}, {24, 3, 0.90, 0.99, 2.8}}
	for _, c := range configs {
		if *refineLandmarks != 0 && c.landmarks != *refineLandmarks {
			continue
		}
		for _, w := range warpKinds {
			if *refineWarp != "" && string(w) != *refineWarp {
				continue
			}
			var sum, worst scores
			worst.Recall, worst.Precision = 1, 1
			n := 0
			for seed := *refineFirstSeed; seed < *refineFirstSeed+*refineSeeds; seed++ {
				s := newScenario(defaultParams(w, c.landmarks, c.zSD), uint64(seed))
				before, after, res := runScenario(t, s)
				t.Logf("%-11s %d landmarks, z sd %g, seed %d: before %v\n    after %v; %d pairs, %d rounds, landmark LOO RMS %.2f → %.2f µm",
					w, c.landmarks, c.zSD, seed, before, after, len(res.Pairs), len(res.Rounds), rmsOf(res.LandmarkBefore), rmsOf(res.LandmarkAfter))
				if res.Worse {
					t.Errorf("%s seed %d: %s", w, seed, res.WorseReason)
				}
				if after.Coverage < 0.90 || after.Coverage > 0.99 {
					t.Errorf("%s, %d landmarks, seed %d: coverage %.3f, want 0.90–0.99", w, c.landmarks, seed, after.Coverage)
				}
				if after.Precision < c.precision {
					t.Errorf("%s, %d landmarks, seed %d: precision %.4f, want ≥ %.3f in every scenario", w, c.landmarks, seed, after.Precision, c.precision)
				}
				sum.Recall += after.Recall
				sum.Precision += after.Precision
				sum.MedianUM += after.MedianUM
				worst.Recall = math.Min(worst.Recall, after.Recall)
				worst.Precision = math.Min(worst.Precision, after.Precision)
				n++
			}
			r, p, m := sum.Recall/float64(n), sum.Precision/float64(n), sum.MedianUM/float64(n)
			t.Logf("%-11s %d landmarks, z sd %g: mean recall %.3f (worst %.3f), precision %.4f (worst %.4f), median %.2f µm",
				w, c.landmarks, c.zSD, r, worst.Recall, p, worst.Precision, m)
			wantR, wantP := c.recall, c.precision
			if r < wantR || p < wantP || m > c.medianUM {
				t.Errorf("%s, %d landmarks, z sd %g: mean recall %.3f precision %.4f median %.2f µm; want recall ≥ %.2f, precision ≥ %.3f, median ≤ %.1f µm",
					w, c.landmarks, c.zSD, r, p, m, wantR, wantP, c.medianUM)
			}
		}
	}
}
