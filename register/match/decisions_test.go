package match

import (
	"bytes"
	"strings"
	"testing"

	"ferry/landmarks"
	"ferry/register"
	"ferry/status"
	"ferry/transform"
)

// Decisions fix, forbid and remove: an accepted cell keeps its candidate
// even when another is nearer, a rejected pair is never chosen, a cell with
// no counterpart is unmatched, and a candidate accepted for one cell is
// taken from its neighbours.
func TestMatchWithDecisions(t *testing.T) {
	cands := lattice(200, 20)
	nearest := func(p transform.Vec) int {
		best, bd := -1, 0.0
		for j, c := range cands {
			if d := c.Sub(p).Norm(); best < 0 || d < bd {
				best, bd = j, d
			}
		}
		return best
	}
	cells := []transform.Vec{{40, 40, 40}, {100, 100, 100}, {60, 120, 80}, {140, 60, 120}}
	var mapped []register.Mapped
	for _, c := range cells {
		mapped = append(mapped, mappedAt(cands[nearest(c)].Add(transform.Vec{0.3, -0.2, 0.1}), 1))
	}
	plain := runMapped(t, mapped, cands, Options{})
	for i, r := range plain {
		if r.Candidate != nearest(cells[i]) || r.Status != status.Matched {
			t.Fatalf("cell %d without decisions: %+v", i, r)
		}
	}
	other := nearest(cells[0].Add(transform.Vec{20, 0, 0}))
	d := &Decisions{
		Accepted: map[int]int{0: other, 3: plain[2].Candidate},
		None:     map[int]bool{1: true},
		Rejected: map[int][]int{},
	}
	res := runMapped(t, mapped, cands, Options{Decisions: d})
	if r := res[0]; r.Candidate != other || r.PMatch != 1 || r.Status != status.Matched || r.Decision != "accepted" {
		t.Errorf("accepted cell: %+v", r)
	}
	if r := res[1]; r.Candidate != -1 || r.PNone != 1 || r.Status != status.Unmatched || r.Decision != "none" {
		t.Errorf("cell with no counterpart: %+v", r)
	}
	// Cell 2's own candidate was accepted for cell 3: it must not get it.
	if r := res[2]; r.Candidate == plain[2].Candidate || r.Decision != "" {
		t.Errorf("cell whose candidate went to another: %+v", r)
	}
	// A rejected pair is struck from the options.
	d2 := &Decisions{Accepted: map[int]int{}, None: map[int]bool{}, Rejected: map[int][]int{1: {plain[1].Candidate}}}
	res = runMapped(t, mapped, cands, Options{Decisions: d2})
	if r := res[1]; r.Candidate == plain[1].Candidate || r.RunnerUp == plain[1].Candidate {
		t.Errorf("rejected pair chosen: %+v", r)
	}
	if !d2.Forbidden(1, plain[1].Candidate) || d2.Forbidden(0, plain[1].Candidate) || !d.Forbidden(2, plain[2].Candidate) {
		t.Error("Forbidden disagrees with the decisions")
	}
}

func TestResolveAndWriteDecisions(t *testing.T) {
	cells, _ := landmarks.ParsePoints("cells.csv", "cells", strings.NewReader("id,x,y,z\nc1,0,0,0\nc2,1,1,1\n#c3\n\"#c3\",2,2,2\n"))
	cands, _ := landmarks.ParsePoints("cands.csv", "candidates", strings.NewReader("id,x,y,z\nn1,0,0,0\nn2,1,1,1\n"))
	text := "id,candidate,decision,decided_at,note\nc1,n2,accepted,,\nc2,n2,rejected,2026-03-01T10:00:00Z,\"a, b\"\n\"#c3\",,none,,\n"
	set, err := landmarks.ParseDecisions("d.csv", strings.NewReader(text))
	if err != nil {
		t.Fatal(err)
	}
	d, err := ResolveDecisions(set, cells, cands)
	if err != nil {
		t.Fatal(err)
	}
	if d.Accepted[0] != 1 || !d.None[2] || len(d.Rejected[1]) != 1 || d.Rejected[1][0] != 1 || d.Len() != 3 {
		t.Errorf("resolved %+v", d)
	}
	if fp, rp := d.FixedPairs(), d.ForbiddenPairs(); len(fp) != 1 || fp[0] != [2]int{0, 1} || len(rp) != 1 || rp[0] != [2]int{1, 1} {
		t.Errorf("fixed %v forbidden %v", fp, rp)
	}
	pairs := d.LandmarkPairs(cells, cands)
	if len(pairs) != 1 || pairs[0].ID != "decided:c1" || pairs[0].Kind != KindDecided || pairs[0].Target != (transform.Vec{1, 1, 1}) {
		t.Errorf("landmark pairs %+v", pairs)
	}
	var b bytes.Buffer
	if err := WriteDecisions(&b, set); err != nil {
		t.Fatal(err)
	}
	if b.String() != text {
		t.Errorf("written\n%s\nwant\n%s", b.String(), text)
	}
	for _, tc := range []struct{ text, err string }{
		{"id,candidate,decision\nc9,n1,accepted\n", `d.csv:2: column "id": cell "c9" is not in cells.csv`},
		{"id,candidate,decision\nc1,n9,rejected\n", `d.csv:2: column "candidate": candidate "n9" is not in cands.csv`},
		{"id,candidate,decision\nc1,n1,accepted\nc2,n1,accepted\n", `d.csv:3: column "candidate": candidate "n1" is accepted for cell "c2" here and for cell "c1" on line 2`},
	} {
		set, err := landmarks.ParseDecisions("d.csv", strings.NewReader(tc.text))
		if err != nil {
			t.Fatal(err)
		}
		if _, err := ResolveDecisions(set, cells, cands); err == nil || !strings.HasPrefix(err.Error(), tc.err) {
			t.Errorf("error %v, want %q", err, tc.err)
		}
	}
}

// What WriteDecisions writes reads back as the same decisions.
func FuzzDecisionsRoundTrip(f *testing.F) {
	f.Add([]byte("id,candidate,decision,decided_at,note,who\nc1,n1,accepted,,\"a, \"\"b\"\"\",x\n\"#c2\",,none,,,\n c3,n2,rejected,2026-03-01T10:00:00Z,,\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		set, err := landmarks.ParseDecisions("d.csv", bytes.NewReader(data))
		if err != nil {
			return
		}
		var b bytes.Buffer
		if err := WriteDecisions(&b, set); err != nil {
			t.Fatal(err)
		}
		again, err := landmarks.ParseDecisions("d.csv", bytes.NewReader(b.Bytes()))
		if err != nil {
			t.Fatalf("written file does not read: %v\n%s", err, b.String())
		}
		if len(again.Decisions) != len(set.Decisions) {
			t.Fatalf("%d decisions read back as %d\n%s", len(set.Decisions), len(again.Decisions), b.String())
		}
		for i, d := range set.Decisions {
			e := again.Decisions[i]
			if d.ID != e.ID || d.Candidate != e.Candidate || d.Verdict != e.Verdict || d.DecidedAt != e.DecidedAt || strings.TrimLeft(d.Note, " ") != strings.TrimLeft(e.Note, " ") {
				t.Fatalf("decision %d: %+v read back as %+v\n%s", i, d, e, b.String())
			}
		}
	})
}
