package match

import (
	"bytes"
	"math"
	"strings"
	"testing"

	"ferry/landmarks"
	"ferry/register"
	"ferry/status"
	"ferry/transform"
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
		{Candidate: 1, PMatch: 0.98765, PNone: 0.01, DistanceUM: 1.23456789, RunnerUp: 0, PRunnerUp: 0.00235, Status: status.Matched,
			Mapped: register.Mapped{Pos: transform.Vec{2, 4, 6}, R95: 2.5, Status: status.OK}},
		{Candidate: 0, PMatch: 0.6, PNone: 0.4, DistanceUM: 3, RunnerUp: -1, Status: status.Ambiguous,
			Mapped: register.Mapped{Pos: transform.Vec{-0.00001, 1, 2}, R95: 3, Status: status.Extrapolated}},
		{Candidate: -1, PMatch: 1, PNone: 1, DistanceUM: math.NaN(), RunnerUp: -1, Status: status.Unmatched, Outside: true,
			Mapped: register.Mapped{Status: status.NoInverse}},
	}
	var b bytes.Buffer
	if err := WriteMatches(&b, cells, cands, res, nil); err != nil {
		t.Fatal(err)
	}
	// An unmatched row names no candidate, so it has no p_match: p_none
	// says how likely no counterpart is.
	want := "id,candidate,p_match,distance_um,runner_up,p_runner_up,status,p_none,cell_x_um,cell_y_um,cell_z_um,candidate_x_um,candidate_y_um,candidate_z_um,r95_um,decision,osi,note\n" +
		"c1,n2,0.9877,1.2346,n1,0.0024,matched,0.0100,2.0000,4.0000,6.0000,1.0000,1.0000,1.0000,2.5000,,0.5,\"a, b\"\n" +
		"c2,n1,0.6000,3.0000,,0.0000,ambiguous,0.4000,0.0000,1.0000,2.0000,0.0000,0.0000,0.0000,3.0000,,0.25,\n" +
		"c3,,,,,0.0000,unmatched,1.0000,,,,,,,,,0.75,x\n"
	if b.String() != want {
		t.Errorf("got\n%s\nwant\n%s", b.String(), want)
	}

	// With target voxels the mapped cell is written in voxels, the
	// candidate as read.
	b.Reset()
	vox := transform.Vec{2, 4, 0.5}
	if err := WriteMatches(&b, cells, cands, res[:1:1], &vox); err == nil {
		t.Error("one result for three cells was written")
	}
	b.Reset()
	if err := WriteMatches(&b, cells, cands, res, &vox); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(b.String(), "\n")
	if got, want := lines[0], "id,candidate,p_match,distance_um,runner_up,p_runner_up,status,p_none,cell_x_vox,cell_y_vox,cell_z_vox,candidate_x_vox,candidate_y_vox,candidate_z_vox,r95_um,decision,osi,note"; got != want {
		t.Errorf("voxel header %q, want %q", got, want)
	}
	if got, want := lines[1], "c1,n2,0.9877,1.2346,n1,0.0024,matched,0.0100,1.0000,1.0000,12.0000,1.0000,1.0000,1.0000,2.5000,,0.5,\"a, b\""; got != want {
		t.Errorf("voxel row %q, want %q", got, want)
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
		if err := WriteMatches(&bytes.Buffer{}, cells, cands, res, nil); err == nil {
			t.Errorf("%+v: written", res)
		}
	}
}
