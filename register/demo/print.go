// What the demo tells its user: the summary, and the review command line.

package demo

import (
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"ferry/register"
)

// Print writes the summary a user reads.
func (o *Outcome) Print(w io.Writer) {
	a := o.Assessment
	fmt.Fprintln(w, "ferry demo: an invented block of mouse visual cortex, imaged in vivo and by EM")
	fmt.Fprintln(w)
	fmt.Fprintf(w, "1. Check of %d landmark pairs\n", len(a.Landmarks)+len(o.Flagged))
	if len(o.Flagged) == 0 {
		fmt.Fprintln(w, "   No landmark looks wrong.")
	}
	for _, l := range o.flaggedVerdicts {
		fmt.Fprintf(w, "   flagged %s (%s): %s\n", l.ID, l.Kind, l.Flag)
	}
	fmt.Fprintf(w, "   The simulator spoiled %d: %s; the check flagged %d: %s.\n",
		len(o.Wrong), list(o.Wrong), len(o.Flagged), list(o.Flagged))
	fmt.Fprintln(w)
	fmt.Fprintln(w, "2. Fit without the flagged landmarks")
	register.WriteComparison(indent(w), a)
	j := a.JSON()
	fmt.Fprintf(w, "   Leave-one-out error: RMS %.2f µm, median %.2f µm, max %.2f µm.\n", j.RMSUM, j.MedianUM, j.MaxUM)
	fmt.Fprintf(w, "   Calibration: %d of %d landmarks (%.0f %%) inside their predicted 95 %% radius.\n",
		a.Calibration.Inside, a.Calibration.N, 100*a.Calibration.Share())
	fmt.Fprintln(w)
	o.printRefinement(w)
	fmt.Fprintln(w)
	fmt.Fprintf(w, "3. %d imaged cells mapped into the EM volume: %s\n", o.Cells, register.FormatCounts(o.Statuses))
	fmt.Fprintf(w, "   Against the truth: median error %.2f µm, 95th percentile %.2f µm.\n", o.MedianError, o.P95Error)
	fmt.Fprintf(w, "   r95_um holds the true position for %d of %d cells (%.0f %%); for %d of %d cells with status ok (%.0f %%).\n",
		o.CoveredR95, o.Cells, pct(o.CoveredR95, o.Cells), o.CoveredR95Good, o.Good, pct(o.CoveredR95Good, o.Good))
	fmt.Fprintln(w)
	m := o.Matches
	fmt.Fprintf(w, "4. Matched against %d EM nuclei: %s\n", o.Candidates, m.Counts())
	fmt.Fprintf(w, "   Against the truth: %d of %d matched cells right (%.1f %%); %d of the %d cells with a counterpart matched (%.1f %%); %d unmatched cells truly have none.\n",
		o.MatchedRight, o.MatchedRight+o.MatchedWrong, pct(o.MatchedRight, o.MatchedRight+o.MatchedWrong),
		o.MatchedRight, o.WithCounterpart, pct(o.MatchedRight, o.WithCounterpart), o.UnmatchedRight)
	if n := len(m.AmbiguousCells); n > 0 {
		fmt.Fprintf(w, "   %d ambiguous cells, each with its runner-up, are listed in the report: check them by eye.\n", n)
	}
	if o.OverlayMarks > 0 || len(o.Files.Extra) > 0 {
		fmt.Fprintf(w, "   overlay.png: the in vivo stack (orange) resampled onto an EM section (sky blue), %d mapped cells near the section marked.\n", o.OverlayMarks)
	}
	if o.Warped != "" {
		fmt.Fprintf(w, "   %s: the whole in vivo stack warped into the EM frame, a layer for a viewer (voxel size and origin recorded).\n", filepath.Base(o.Warped))
	}
	if e := o.Export; e != nil {
		fmt.Fprintln(w)
		fmt.Fprintf(w, "5. Exported for other programs into %s: the affine part as 4×4 matrices", e.Dir)
		if e.Field != nil {
			g := e.Field.Grid
			end := g.End()
			fmt.Fprintf(w, ", the spline's displacement field on %d × %d × %d samples over the in vivo stack (source x %.0f to %.0f, y %.0f to %.0f, z %.0f to %.0f µm) as a TIFF and an OME-Zarr store",
				g.Size[0], g.Size[1], g.Size[2], g.Origin[0], end[0], g.Origin[1], end[1], g.Origin[2], end[2])
		}
		fmt.Fprintf(w, ", %d mapped cells as a target-voxel point list.\n", e.Points)
		if e.Field != nil {
			fmt.Fprintf(w, "   Sampling error of the field against the spline: %s.\n", e.SequenceError)
		}
		for _, n := range e.Notes {
			fmt.Fprintf(w, "   Note: %s.\n", n)
		}
	}
	fmt.Fprintln(w)
	fmt.Fprintf(w, "Files in %s:\n", filepath.Dir(o.Files.Transform))
	for _, p := range []string{o.Files.Landmarks, o.Files.Cells, o.Files.Candidates, o.Files.Fitted, o.Files.Transform, o.Files.Pairs} {
		if p != "" && (p != o.Files.Fitted || o.Files.Fitted != o.Files.Transform) {
			fmt.Fprintf(w, "   %s\n", p)
		}
	}
	for _, p := range []string{o.Files.Mapped, o.Files.Matches} {
		fmt.Fprintf(w, "   %s (what made it: %s)\n", p, filepath.Base(register.SidecarPath(p)))
	}
	for _, p := range o.Files.Extra {
		fmt.Fprintf(w, "   %s\n", p)
	}
	fmt.Fprintf(w, "   truth: %s, %s\n", o.Files.TruthCells, o.Files.TruthLandmarks)
	if o.Files.EMStack != "" {
		fmt.Fprintln(w, "To confirm the matches by eye in a browser, one cell at a time:")
		fmt.Fprintf(w, "   %s\n", ReviewCommand(o.Files))
	}
	fmt.Fprintf(w, "Done in %.1f s. Results are for research: check them by eye before tracing.\n", o.Elapsed.Seconds())
}

func list(ids []string) string {
	if len(ids) == 0 {
		return "none"
	}
	return strings.Join(ids, ", ")
}

func pct(a, b int) float64 {
	if b == 0 {
		return 0
	}
	return 100 * float64(a) / float64(b)
}

// indent prefixes every line written through it with three spaces.
func indent(w io.Writer) io.Writer { return &indenter{w: w, start: true} }

type indenter struct {
	w     io.Writer
	start bool
}

func (i *indenter) Write(p []byte) (int, error) {
	for _, b := range p {
		if i.start {
			if _, err := io.WriteString(i.w, "   "); err != nil {
				return 0, err
			}
		}
		if _, err := i.w.Write([]byte{b}); err != nil {
			return 0, err
		}
		i.start = b == '\n'
	}
	return len(p), nil
}

// IsTerminal reports whether f is a terminal, where progress lines belong.
func IsTerminal(f *os.File) bool {
	info, err := f.Stat()
	return err == nil && info.Mode()&os.ModeCharDevice != 0
}

// ReviewCommand is the ferry review command line for the demo's files.
func ReviewCommand(f Files) string {
	v, e, c := f.SourceVoxel, f.EMVoxel, f.CellSD
	return fmt.Sprintf("ferry review %s --transform %s --cells %s --candidates %s --cell-sd %g,%g,%g --source-stack %s --source-voxel %g,%g,%g --target-stack %s --target-voxel %g,%g,%g --decisions %s",
		f.Matches, f.Transform, f.Cells, f.Candidates, c[0], c[1], c[2], f.SourceStack, v[0], v[1], v[2], f.EMStack, e[0], e[1], e[2],
		filepath.Join(filepath.Dir(f.Matches), "decisions.csv"))
}

// printRefinement says what refine did and what it gained against the
// truth, set against the landmark fit alone.
func (o *Outcome) printRefinement(w io.Writer) {
	r, rec := o.Refined, o.RefineRecord
	if r == nil {
		return
	}
	fmt.Fprintln(w, "2b. Refined with the somata themselves (ferry refine)")
	fmt.Fprintf(w, "   %d rounds; %d cell–nucleus pairs used, %d of them as nodes of the spline.\n", len(r.Rounds), rec.PairsUsed, rec.PairNodes)
	fmt.Fprintf(w, "   Landmark leave-one-out error: RMS %.2f µm before, %.2f µm after.\n", rec.LandmarkRMSBefore, rec.LandmarkRMSAfter)
	if rec.PairsUsed > 0 {
		fmt.Fprintf(w, "   The pairs' own leave-one-out error: median %.2f µm; %d of %d (%.0f %%) inside their 95 %% radius.\n",
			rec.PairLOOMedian, rec.PairCalibration.Inside, rec.PairCalibration.N, 100*rec.PairCalibration.Share)
	}
	if o.RefineRefused != "" {
		fmt.Fprintf(w, "   Refused: %s; the landmark fit is used.\n", o.RefineRefused)
		return
	}
	b := o.Fit
	fmt.Fprintf(w, "   Gained against the truth: median error %.2f → %.2f µm, 95th percentile %.2f → %.2f µm;\n",
		b.MedianError, o.MedianError, b.P95Error, o.P95Error)
	fmt.Fprintf(w, "   matched right %d → %d, matched wrong %d → %d, ambiguous %d → %d (landmark fit → refined).\n",
		b.MatchedRight, o.MatchedRight, b.MatchedWrong, o.MatchedWrong, b.Ambiguous, len(o.Matches.AmbiguousCells))
}
