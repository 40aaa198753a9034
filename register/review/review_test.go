package review

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"ferry/imaging"
	"ferry/landmarks"
	"ferry/register/match"
	"ferry/status"
	"ferry/transform"
)

func TestOrder(t *testing.T) {
	cells, err := landmarks.ParsePoints("cells.csv", "cells", strings.NewReader("id,x,y,z\nc1,0,0,0\nc2,0,0,0\nc3,0,0,0\nc4,0,0,0\nc5,0,0,0\n"))
	if err != nil {
		t.Fatal(err)
	}
	nan := math.NaN()
	ms := []match.Row{
		{ID: "c1", Candidate: "n1", PMatch: 0.99, PNone: 0.01, Status: status.Matched},
		{ID: "c2", Candidate: "n2", PMatch: 0.7, PNone: 0.2, Status: status.Ambiguous},
		{ID: "c3", PMatch: nan, PNone: 0.6, Status: status.Unmatched},
		{ID: "c4", Candidate: "n4", PMatch: 0.55, PNone: 0.4, Status: status.Ambiguous},
	}
	got := Order(cells, ms)
	want := []int{3, 1, 2, 0, 4} // ambiguous by p, then the rest by p, then c5 absent
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("order %v, want %v", got, want)
		}
	}
}

// Each decision rewrites the whole file at once, replacing the cell's
// earlier row, and the file reads back as written.
func TestDecideWritesAtOnce(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "decisions.csv")
	cells, _ := landmarks.ParsePoints("cells.csv", "cells", strings.NewReader("id,x,y,z\nc1,0,0,0\nc2,0,0,0\n"))
	cands, _ := landmarks.ParsePoints("cands.csv", "candidates", strings.NewReader("id,x,y,z\nn1,0,0,0\nn2,0,0,0\n"))
	s := &Session{in: Inputs{Cells: cells, Candidates: cands, DecisionsPath: path},
		cellAt: map[string]int{"c1": 0, "c2": 1}, candAt: map[string]int{"n1": 0, "n2": 1},
		decided: &landmarks.DecisionSet{Path: path}, now: func() time.Time { return time.Date(2026, 3, 1, 10, 0, 0, 0, time.UTC) }}
	ctx := context.Background()
	steps := []struct {
		id      string
		verdict landmarks.Verdict
		cand    string
		want    string
	}{
		{"c1", landmarks.Accepted, "n1", "c1,n1,accepted,2026-03-01T10:00:00Z,\n"},
		{"c2", landmarks.NoCounterpart, "", "c1,n1,accepted,2026-03-01T10:00:00Z,\nc2,,none,2026-03-01T10:00:00Z,\n"},
		{"c1", landmarks.Accepted, "n2", "c2,,none,2026-03-01T10:00:00Z,\nc1,n2,accepted,2026-03-01T10:00:00Z,\n"},
	}
	for _, st := range steps {
		if err := s.Decide(ctx, st.id, st.verdict, st.cand, ""); err != nil {
			t.Fatal(err)
		}
		data, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		if want := "id,candidate,decision,decided_at,note\n" + st.want; string(data) != want {
			t.Errorf("after %s %s: file\n%s\nwant\n%s", st.id, st.verdict, data, want)
		}
	}
	if err := s.Decide(ctx, "c2", landmarks.Accepted, "n2", ""); err == nil {
		t.Error("a candidate accepted for two cells")
	}
	if _, err := landmarks.ReadDecisions(path); err != nil {
		t.Fatal(err)
	}
}

func ExampleOrder() {
	cells, _ := landmarks.ParsePoints("cells.csv", "cells", strings.NewReader("id,x,y,z\nc1,0,0,0\nc2,0,0,0\nc3,0,0,0\n"))
	ms := []match.Row{
		{ID: "c1", Candidate: "n1", PMatch: 0.99, Status: status.Matched},
		{ID: "c2", Candidate: "n2", PMatch: 0.62, Status: status.Ambiguous},
		{ID: "c3", PMatch: math.NaN(), PNone: 0.9, Status: status.Unmatched},
	}
	for _, i := range Order(cells, ms) {
		fmt.Print(cells.Points[i].ID, " ")
	}
	fmt.Println()
	// Output: c2 c3 c1
}

// Sampling a panel: trilinear inside, nothing outside or at positions that
// are not finite, a one-page stack taken as a plane at any depth, and the
// same values read in one crop or row by row.
func TestSample(t *testing.T) {
	dir := t.TempDir()
	st, err := imaging.NewStack(6, 5, 4, 16)
	if err != nil {
		t.Fatal(err)
	}
	for k := range 4 {
		for j := range 5 {
			for i := range 6 {
				st.Set(i, j, k, uint16(100*k+10*j+i))
			}
		}
	}
	path := filepath.Join(dir, "s.tif")
	if err := imaging.WriteTIFF(path, st); err != nil {
		t.Fatal(err)
	}
	vol, err := imaging.OpenVolume(path)
	if err != nil {
		t.Fatal(err)
	}
	defer vol.Close()
	vox := []transform.Vec{{1.5, 2.25, 1.5}, {4, 3, 2}, {5.5, 1, 1}, {-0.5, 1, 1}, {math.NaN(), 1, 1}, {1e300, 1, 1}}
	ok := []bool{true, true, true, true, true, true}
	want := []float64{100*1.5 + 10*2.25 + 1.5, 234, 0, 0, 0, 0}
	in := []bool{true, true, false, false, false, false}
	values, inside, err := sample(vol, vox, ok)
	if err != nil {
		t.Fatal(err)
	}
	for i := range vox {
		if inside[i] != in[i] || math.Abs(values[i]-want[i]) > 1e-9 {
			t.Errorf("position %v: %g inside %v, want %g inside %v", vox[i], values[i], inside[i], want[i], in[i])
		}
	}
	rows, rowsIn, err := sampleRows(vol, vox[:4], ok[:4], 2)
	if err != nil {
		t.Fatal(err)
	}
	for i := range 4 {
		if rows[i] != values[i] || rowsIn[i] != inside[i] {
			t.Errorf("row by row, position %d: %g, want %g", i, rows[i], values[i])
		}
	}
	// A plane at any depth.
	plane, _ := imaging.NewStack(6, 5, 1, 8)
	plane.Set(2, 3, 0, 200)
	ppath := filepath.Join(dir, "p.tif")
	if err := imaging.WriteTIFF(ppath, plane); err != nil {
		t.Fatal(err)
	}
	pv, err := imaging.OpenVolume(ppath)
	if err != nil {
		t.Fatal(err)
	}
	defer pv.Close()
	values, inside, err = sample(pv, []transform.Vec{{2, 3, 57.5}}, []bool{true})
	if err != nil || !inside[0] || values[0] != 200 {
		t.Errorf("plane: %v inside %v, %v", values, inside, err)
	}
}
