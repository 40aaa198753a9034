package match

import (
	"math"
	"testing"

	"github.com/google/go-cmp/cmp"

	"ferry/simulate"
	"ferry/transform"
)

// MatchMapped of the cells as the mapper maps them is Match.
func TestMatchMappedIsMatchOfTheMappedCells(t *testing.T) {
	f := fitScenario(t, simulate.DefaultParams(), 3, "")
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
	opt := Options{CellIDs: cellIDs, CandidateIDs: candIDs}
	sd := sc.Params.CellSDUM
	want, err := Match(f.mapper, cells, &sd, cands, opt)
	if err != nil {
		t.Fatal(err)
	}
	got, err := MatchMapped(f.mapper.MapAll(cells, &sd, false), cands, opt)
	if err != nil {
		t.Fatal(err)
	}
	if d := cmp.Diff(want, got); d != "" {
		t.Errorf("MatchMapped differs from Match (-Match +MatchMapped):\n%s", d)
	}
	bad := f.mapper.MapAll(cells[:1], &sd, false)
	bad[0].Pos[0] = math.Inf(1)
	if _, err := MatchMapped(bad, cands, opt); err == nil {
		t.Error("a mapped position that is not finite was taken")
	}
}
