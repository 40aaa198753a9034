package refine

import (
	"slices"
	"testing"

	"ferry/register"
	"ferry/register/match"
)

// Decisions feed the rounds: a rejected pair is never used, a soma with no
// counterpart never pairs, and an accepted pair is a landmark of kind
// decided_soma (added as match.AddDecidedLandmarks adds it), not a soma pair,
// its candidate paired with no other soma. The decisions are taken on
// somata the refinement without them pairs, so that each one has something
// to change.
func TestDecisionsSteerThePairs(t *testing.T) {
	s := newScenario(smallParams(warpBumps), 4)
	sd := s.Params.CellSD
	opt := Options{Settings: register.Settings{Smoothing: register.Smoothing{Auto: true}}, CellSD: &sd, CandidateSD: s.Params.NucleusSD}
	first, err := Refine(s.input(), opt)
	if err != nil {
		t.Fatal(err)
	}
	if len(first.Pairs) < 30 {
		t.Fatalf("only %d pairs without decisions", len(first.Pairs))
	}
	d := &match.Decisions{Accepted: map[int]int{}, None: map[int]bool{}, Rejected: map[int][]int{}}
	for k, pr := range first.Pairs[:15] {
		switch k % 3 {
		case 0:
			d.Rejected[pr.Soma] = []int{pr.Candidate}
		case 1:
			d.None[pr.Soma] = true
		case 2:
			d.Accepted[pr.Soma] = pr.Candidate
		}
	}
	in := s.input()
	// The accepted pairs join the landmarks, as refine --decisions adds
	// them to the landmark file.
	lm := *s.Landmarks
	lm.IDs, lm.Kinds = slices.Clone(lm.IDs), slices.Clone(lm.Kinds)
	lm.Source, lm.Target, lm.Lines = slices.Clone(lm.Source), slices.Clone(lm.Target), nil
	for _, p := range d.FixedPairs() {
		lm.IDs = append(lm.IDs, match.DecidedPrefix+s.CellIDs[p[0]])
		lm.Kinds = append(lm.Kinds, match.KindDecided)
		lm.Source = append(lm.Source, s.Cells[p[0]])
		lm.Target = append(lm.Target, s.Candidates[p[1]])
	}
	in.Landmarks, in.Decisions = &lm, d
	res, err := Refine(in, opt)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Pairs) < 30 {
		t.Fatalf("only %d pairs with decisions", len(res.Pairs))
	}
	for _, pr := range res.Pairs {
		id := s.CellIDs[pr.Soma]
		if _, no := d.Rejected[pr.Soma]; no && pr.Candidate == d.Rejected[pr.Soma][0] {
			t.Errorf("soma %s paired to the candidate rejected for it", id)
		}
		if d.None[pr.Soma] {
			t.Errorf("soma %s with no counterpart paired to candidate %d", id, pr.Candidate)
		}
		if _, ok := d.Accepted[pr.Soma]; ok {
			t.Errorf("accepted soma %s is also a soma pair", id)
		}
		for c, j := range d.Accepted {
			if pr.Candidate == j && pr.Soma != c {
				t.Errorf("soma %s paired to candidate %d, accepted for soma %s", id, j, s.CellIDs[c])
			}
		}
	}
	rec := res.Record(in, opt, nil)
	landmark := map[string]bool{}
	for _, l := range rec.Landmarks {
		landmark[l.ID] = true
	}
	for c, j := range d.Accepted {
		id := match.DecidedPrefix + s.CellIDs[c]
		if !landmark[id] {
			t.Errorf("accepted pair of soma %s is not among the landmarks", s.CellIDs[c])
		}
		// And a node of the refined spline, at the soma, aimed at its
		// candidate.
		found := false
		for k, x := range res.Nodes[:lm.Len()] {
			if x == s.Cells[c] && res.Targets[k] == s.Candidates[j] {
				found = true
			}
		}
		if !found {
			t.Errorf("accepted pair of soma %s is not a node of the fit", s.CellIDs[c])
		}
	}
}
