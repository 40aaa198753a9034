package demo

import (
	"bytes"
	"context"
	"os"
	"slices"
	"strings"
	"testing"

	"ferry/imaging"
)

// The whole job on the built-in scenario: the check finds exactly the
// landmarks the simulator spoiled, the mapped cells are within a few
// micrometres of the truth, r95 holds about 95 % of the cells inside the
// landmarks' hull, every file is written, and the summary says so.
func TestDemo(t *testing.T) {
	dir := t.TempDir()
	out, err := Run(context.Background(), Options{Dir: dir, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	wrong := slices.Clone(out.Wrong)
	slices.Sort(wrong)
	flagged := slices.Clone(out.Flagged)
	slices.Sort(flagged)
	if !slices.Equal(wrong, flagged) {
		t.Errorf("flagged %v, the simulator spoiled %v", flagged, wrong)
	}
	if out.MedianError > 4 {
		t.Errorf("median error against the truth %.2f µm", out.MedianError)
	}
	if share := float64(out.CoveredR95Good) / float64(out.Good); share < 0.90 || share > 0.99 {
		t.Errorf("r95 holds %.3f of the cells with status ok", share)
	}
	if out.MatchedWrong > 0 || out.MatchedRight == 0 {
		t.Errorf("%d matched cells right, %d wrong", out.MatchedRight, out.MatchedWrong)
	}
	if share := float64(out.MatchedRight) / float64(out.WithCounterpart); share < 0.9 {
		t.Errorf("only %.3f of the cells with a counterpart matched", share)
	}
	files := []string{out.Files.Matches, out.Files.Landmarks, out.Files.Cells, out.Files.Candidates, out.Files.Transform, out.Files.Mapped}
	for _, p := range append(files, out.Files.Extra...) {
		if info, err := os.Stat(p); err != nil || info.Size() == 0 {
			t.Errorf("%s: not written (%v)", p, err)
		}
	}
	// The export: the spline's field within a fraction of a micrometre of
	// the spline, and every cell with a position in the point list.
	if e := out.Export; e == nil || e.Field == nil {
		t.Error("the demo wrote no displacement field")
	} else {
		if e.SequenceError.MaxUM <= 0 || e.SequenceError.MaxUM > 0.5 {
			t.Errorf("sampling error of the exported field %v", e.SequenceError)
		}
		if e.Points+e.Unplaced != out.Cells || e.Points == 0 {
			t.Errorf("point list of %d cells (%d unplaced) for %d mapped", e.Points, e.Unplaced, out.Cells)
		}
	}
	var b bytes.Buffer
	out.Print(&b)
	// The warped stack records its grid, and most of it holds the stack.
	warped, err := imaging.ReadStack(out.Files.Extra[slices.Index(out.Files.Extra, out.Warped)])
	if err != nil {
		t.Fatal(err)
	}
	if g := warped.Geometry; g.VoxelUM != WarpedVoxelUM || !g.HasOrigin[2] {
		t.Errorf("the warped stack records %s", g.Describe())
	}
	lit := 0
	for _, v := range warped.Data {
		if v > 0 {
			lit++
		}
	}
	if lit < len(warped.Data)/2 {
		t.Errorf("%d of %d warped voxels hold the stack", lit, len(warped.Data))
	}
	for _, want := range []string{"flagged v", "Chosen:", "Calibration:", "Against the truth", "Sampling error", "Results are for research", WarpedFile} {
		if !strings.Contains(b.String(), want) {
			t.Errorf("summary lacks %q:\n%s", want, b.String())
		}
	}
}
