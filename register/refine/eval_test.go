package refine

import (
	"testing"

	"ferry/register"
	"ferry/register/match"
	"ferry/transform"
)

// evaluate maps and matches the scenario's cells as map and match would
// with the transform file f, and scores them against the truth.
func evaluate(t testing.TB, s *scenario, f *transform.File) scores {
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
		case match.StatusMatched:
			sc.Matched++
			if r.Candidate == s.Counterpart[i] {
				right++
			}
		case match.StatusAmbiguous:
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
func baseFile(t testing.TB, s *scenario, a *register.Assessment) *transform.File {
	t.Helper()
	raw, err := register.NewUncertaintyModel(s.Landmarks, a, register.Settings{Smoothing: register.Smoothing{Auto: true}}).Marshal()
	if err != nil {
		t.Fatal(err)
	}
	return &transform.File{Transform: a.Result.Transform, Smoothing: a.Smoothing, Uncertainty: raw,
		Landmarks: transform.Provenance{Path: "landmarks.csv", SHA256: "0"}}
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
	back, err := transform.Unmarshal("refined.json", data)
	if err != nil {
		t.Fatal(err)
	}
	after = evaluate(t, s, back)
	return before, after, res
}

func TestExplore(t *testing.T) {
	for _, w := range warpKinds {
		for _, cfg := range []struct {
			n  int
			zs float64
		}{{48, 1}, {24, 3}} {
			s := newScenario(defaultParams(w, cfg.n, cfg.zs), 1)
			b, a, res := runScenario(t, s)
			t.Logf("%s n=%d zsd=%g cands=%d\n  before %v\n  after  %v\n  pairs %d rounds %d lm %.2f→%.2f worse=%v",
				w, cfg.n, cfg.zs, len(s.Candidates), b, a, len(res.Pairs), len(res.Rounds),
				rmsOf(res.LandmarkBefore), rmsOf(res.LandmarkAfter), res.Worse)
		}
	}
}
