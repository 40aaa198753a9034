package match

import (
	"bytes"
	"math"
	"testing"

	"ferry/landmarks"
	"ferry/register"
	"ferry/simulate"
	"ferry/status"
	"ferry/transform"
)

// fitted is a simulated scenario with its transform fitted the way a user
// fits it: check, set the flagged landmarks aside, fit again.
type fitted struct {
	sc     *simulate.Scenario
	mapper *register.Mapper
	model  transform.Kind
	// fallback says the automatic choice could not be mapped with and an
	// affine fit was used instead.
	fallback error
}

func fitScenario(t testing.TB, p simulate.Params, seed uint64, model transform.Kind) fitted {
	return fitScenarioWith(t, p, seed, register.Settings{Model: model, Smoothing: register.Smoothing{Auto: true}})
}

func fitScenarioWith(t testing.TB, p simulate.Params, seed uint64, base register.Settings) fitted {
	t.Helper()
	sc, err := simulate.Generate(p, seed)
	if err != nil {
		t.Fatal(err)
	}
	files, err := sc.Encode()
	if err != nil {
		t.Fatal(err)
	}
	set, err := landmarks.ParsePairs(simulate.LandmarksFile, bytes.NewReader(files[simulate.LandmarksFile]))
	if err != nil {
		t.Fatal(err)
	}
	fit := func(s register.Settings) (*register.Mapper, transform.Kind, error) {
		var exclude []string
		for {
			prob, err := register.PrepareLandmarks(set, exclude, register.Voxels{})
			if err != nil {
				return nil, "", err
			}
			a, err := register.Assess(prob, s)
			if err != nil {
				return nil, "", err
			}
			if flagged := a.Flagged(); len(flagged) > 0 && exclude == nil {
				exclude = flagged
				continue
			}
			f := register.NewRegistration(prob, a, s, register.Provenance{Command: "fit"})
			m, err := register.NewMapper(f)
			return m, a.Chosen, err
		}
	}
	out := fitted{sc: sc}
	out.mapper, out.model, err = fit(base)
	if err != nil {
		// The spline's predictor may not be there yet: fall back on an
		// affine fit, and say so.
		out.fallback = err
		base.Model = transform.Affine
		out.mapper, out.model, err = fit(base)
		if err != nil {
			t.Fatal(err)
		}
	}
	return out
}

// tally compares matches with the simulator's truth.
type tally struct {
	cells, withCounterpart        int
	matched, matchedRight         int
	ambiguous, ambiguousRight     int
	unmatched, unmatchedRight     int
	counterpartMatchedRight       int
	r95Inside                     int
	outsideUnmatched, outsideCell int
}

func (f fitted) run(t testing.TB, opt Options) (tally, []Result) {
	t.Helper()
	sc := f.sc
	cells := make([]transform.Vec, len(sc.Cells))
	cellIDs := make([]string, len(sc.Cells))
	for i, c := range sc.Cells {
		cells[i], cellIDs[i] = c.SourceUM, c.ID
	}
	cands := make([]transform.Vec, len(sc.Candidates))
	candIDs := make([]string, len(sc.Candidates))
	for j, c := range sc.Candidates {
		cands[j], candIDs[j] = c.TargetUM, c.ID
	}
	opt.CellIDs, opt.CandidateIDs = cellIDs, candIDs
	sd := sc.Params.CellSDUM
	res, err := Match(f.mapper, cells, &sd, cands, opt)
	if err != nil {
		t.Fatal(err)
	}
	return score(sc, res), res
}

// score compares the matches of sc's cells with the truth.
func score(sc *simulate.Scenario, res []Result) tally {
	var n tally
	for i, c := range sc.Cells {
		r := res[i]
		n.cells++
		got := ""
		if r.Candidate >= 0 {
			got = sc.Candidates[r.Candidate].ID
		}
		right := got == c.TrueCandidate
		if c.TrueCandidate != "" {
			n.withCounterpart++
			if r.Status == status.Matched && right {
				n.counterpartMatchedRight++
			}
		}
		if !sc.EMBlock.Contains(c.TrueTargetUM) {
			n.outsideCell++
			if r.Status == status.Unmatched {
				n.outsideUnmatched++
			}
		}
		switch r.Status {
		case status.Matched:
			n.matched++
			if right {
				n.matchedRight++
			}
		case status.Ambiguous:
			n.ambiguous++
			if right {
				n.ambiguousRight++
			}
		case status.Unmatched:
			n.unmatched++
			if right {
				n.unmatchedRight++
			}
		}
		if r.Mapped.Pos.Sub(c.TrueTargetUM).Norm() <= r.Mapped.R95 {
			n.r95Inside++
		}
	}
	return n
}

func (n *tally) add(m tally) {
	n.cells += m.cells
	n.withCounterpart += m.withCounterpart
	n.matched += m.matched
	n.matchedRight += m.matchedRight
	n.ambiguous += m.ambiguous
	n.ambiguousRight += m.ambiguousRight
	n.unmatched += m.unmatched
	n.unmatchedRight += m.unmatchedRight
	n.counterpartMatchedRight += m.counterpartMatchedRight
	n.r95Inside += m.r95Inside
	n.outsideUnmatched += m.outsideUnmatched
	n.outsideCell += m.outsideCell
}

func share(a, b int) float64 {
	if b == 0 {
		return math.NaN()
	}
	return float64(a) / float64(b)
}
