package match

import (
	"bytes"
	"math"
	"strings"
	"testing"

	"ferry/landmarks"
)

func TestWriteMatches(t *testing.T) {
	cells, err := landmarks.ParsePoints("cells.csv", "cells", strings.NewReader(
		"id,x,y,z,osi,note\nc1,0,0,0,0.5,\"a, b\"\nc2,1,1,1,0.25,\nc3,2,2,2,0.75,x\n"))
	if err != nil {
		t.Fatal(err)
	}
	cands, err := landmarks.ParsePoints("cands.csv", "candidates", strings.NewReader(
		"id,x,y,z\nn1,0,0,0\nn2,1,1,1\n"))
	if err != nil {
		t.Fatal(err)
	}
	res := []Result{
		{Candidate: 1, PMatch: 0.98765, PNone: 0.01, DistanceUM: 1.23456789, RunnerUp: 0, PRunnerUp: 0.00235, Status: StatusMatched},
		{Candidate: 0, PMatch: 0.6, PNone: 0.4, DistanceUM: 3, RunnerUp: -1, Status: StatusAmbiguous},
		{Candidate: -1, PMatch: 1, PNone: 1, DistanceUM: math.NaN(), RunnerUp: -1, Status: StatusUnmatched, Outside: true},
	}
	var b bytes.Buffer
	if err := WriteMatches(&b, cells, cands, res); err != nil {
		t.Fatal(err)
	}
	want := "id,candidate,p_match,distance_um,runner_up,p_runner_up,status,p_none,osi,note\n" +
		"c1,n2,0.9877,1.2346,n1,0.0024,matched,0.0100,0.5,\"a, b\"\n" +
		"c2,n1,0.6000,3.0000,,0.0000,ambiguous,0.4000,0.25,\n" +
		"c3,,1.0000,,,0.0000,unmatched,1.0000,0.75,x\n"
	if b.String() != want {
		t.Errorf("got\n%s\nwant\n%s", b.String(), want)
	}

	s, err := Summarise(cells, cands, res)
	if err != nil {
		t.Fatal(err)
	}
	if got, want := s.String(), "3 cells: 1 matched, 1 ambiguous, 1 unmatched (1 outside the candidates' volume)"; got != want {
		t.Errorf("summary %q, want %q", got, want)
	}
	if len(s.AmbiguousCells) != 1 || s.AmbiguousCells[0] != (Ambiguity{Cell: "c2", Candidate: "n1", PMatch: 0.6, PNone: 0.4}) {
		t.Errorf("ambiguous cells %+v", s.AmbiguousCells)
	}
	var amb bytes.Buffer
	if err := s.WriteAmbiguous(&amb); err != nil {
		t.Fatal(err)
	}
	if got, want := amb.String(), "  c2: n1 (p 0.6000), runner-up no match, no match p 0.4000\n"; got != want {
		t.Errorf("ambiguous list %q, want %q", got, want)
	}
}

func TestWriteMatchesRefusesMismatch(t *testing.T) {
	cells, _ := landmarks.ParsePoints("cells.csv", "cells", strings.NewReader("id,x,y,z\nc1,0,0,0\n"))
	cands, _ := landmarks.ParsePoints("cands.csv", "candidates", strings.NewReader("id,x,y,z\nn1,0,0,0\n"))
	for _, res := range [][]Result{
		nil,
		{{Candidate: 3, RunnerUp: -1}},
	} {
		if err := WriteMatches(&bytes.Buffer{}, cells, cands, res); err == nil {
			t.Errorf("%+v: written", res)
		}
	}
}
