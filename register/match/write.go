package match

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"ferry/landmarks"
	"ferry/register"
)

// Columns are the columns WriteMatches writes before the cells' own extra
// columns.
var Columns = []string{"id", "candidate", "p_match", "distance_um", "runner_up", "p_runner_up", "status", "p_none"}

// WriteMatches writes the matches in the contract's columns, after a
// comment line with the provenance: id, candidate (empty when none),
// p_match, distance_um, runner_up (empty when none), p_runner_up (0 when
// none), status,
// then p_none (the posterior probability that the cell has no counterpart
// among the candidates) and the cells' own extra columns. Probabilities have
// four decimals; distances are micrometres to the nanometre. res is Match's
// result for cells and cands, in their order.
func WriteMatches(w io.Writer, prov register.Provenance, cells *landmarks.PointSet, cands *landmarks.PointSet, res []Result) error {
	if len(res) != len(cells.Points) {
		return fmt.Errorf("match: %d results for %d cells", len(res), len(cells.Points))
	}
	if _, err := fmt.Fprintf(w, "# %s\n", prov.Line()); err != nil {
		return err
	}
	cw := csv.NewWriter(w)
	header := append(append([]string(nil), Columns...), landmarks.KeptColumnNames(Columns, cells.ExtraColumns)...)
	if err := cw.Write(header); err != nil {
		return err
	}
	row := make([]string, 0, len(header))
	for i, c := range cells.Points {
		r := res[i]
		cand, runner, err := candidateIDs(cands, r)
		if err != nil {
			return fmt.Errorf("match: cell %q: %v", c.ID, err)
		}
		for _, v := range []float64{r.PMatch, r.DistanceUM, r.PRunnerUp, r.PNone} {
			if math.IsInf(v, 0) {
				return &landmarks.InputError{File: cells.Path, Line: c.Line, Msg: fmt.Sprintf("cell %q: a distance or probability of %v, not a finite number: nothing written", c.ID, v)}
			}
		}
		row = append(row[:0], c.ID, cand, formatP(r.PMatch), formatDistance(r.DistanceUM), runner, formatP(r.PRunnerUp), r.Status, formatP(r.PNone))
		row = append(row, c.Extra...)
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

func candidateIDs(cands *landmarks.PointSet, r Result) (cand, runner string, err error) {
	for _, x := range []struct {
		idx int
		dst *string
	}{{r.Candidate, &cand}, {r.RunnerUp, &runner}} {
		if x.idx < 0 {
			continue
		}
		if x.idx >= len(cands.Points) {
			return "", "", fmt.Errorf("candidate %d of %d", x.idx+1, len(cands.Points))
		}
		*x.dst = cands.Points[x.idx].ID
	}
	return cand, runner, nil
}

// formatP writes a probability with four decimals, never "-0.0000".
func formatP(p float64) string {
	return strconv.FormatFloat(math.Max(0, math.Min(1, p)), 'f', 4, 64)
}

// formatDistance writes micrometres to the nanometre, empty when there is no
// distance.
func formatDistance(d float64) string {
	if math.IsNaN(d) {
		return ""
	}
	return strconv.FormatFloat(math.Max(d, 0), 'f', 4, 64)
}

// Summary counts the matches by status and lists the ambiguous ones, for a
// person to look at before tracing.
type Summary struct {
	Cells, Matched, Ambiguous, Unmatched int
	// Outside counts the unmatched cells mapped outside the candidates'
	// volume by more than their 95 % radius.
	Outside int
	// PriorCounterpart is the share of cells with a counterpart that the
	// match used.
	PriorCounterpart float64
	// AmbiguousCells are the ambiguous matches in the order of the cells.
	AmbiguousCells []Ambiguity
}

// Ambiguity is one ambiguous match: the cell, the candidate chosen and the
// runner-up (empty when the alternative is no match at all) with their
// posterior probabilities.
type Ambiguity struct {
	Cell, Candidate, RunnerUp string
	PMatch, PRunnerUp, PNone  float64
}

// Summarise counts the results of Match for cells and cands.
func Summarise(cells, cands *landmarks.PointSet, res []Result) (Summary, error) {
	if len(res) != len(cells.Points) {
		return Summary{}, fmt.Errorf("match: %d results for %d cells", len(res), len(cells.Points))
	}
	s := Summary{Cells: len(res)}
	for i, r := range res {
		s.PriorCounterpart = r.PriorCounterpart
		switch r.Status {
		case StatusMatched:
			s.Matched++
		case StatusAmbiguous:
			s.Ambiguous++
			cand, runner, err := candidateIDs(cands, r)
			if err != nil {
				return Summary{}, fmt.Errorf("match: cell %q: %v", cells.Points[i].ID, err)
			}
			s.AmbiguousCells = append(s.AmbiguousCells, Ambiguity{
				Cell: cells.Points[i].ID, Candidate: cand, RunnerUp: runner,
				PMatch: r.PMatch, PRunnerUp: r.PRunnerUp, PNone: r.PNone,
			})
		case StatusUnmatched:
			s.Unmatched++
			if r.Outside {
				s.Outside++
			}
		}
	}
	return s, nil
}

// String is the summary in one line.
func (s Summary) String() string { return fmt.Sprintf("%d cells: %s", s.Cells, s.Counts()) }

// Counts are the counts by status in a few words.
func (s Summary) Counts() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%d matched, %d ambiguous, %d unmatched", s.Matched, s.Ambiguous, s.Unmatched)
	if s.Outside > 0 {
		fmt.Fprintf(&b, " (%d outside the candidates' volume)", s.Outside)
	}
	return b.String()
}

// WriteAmbiguous lists the ambiguous matches for a person, one a line.
func (s Summary) WriteAmbiguous(w io.Writer) error {
	for _, a := range s.AmbiguousCells {
		alt := "no match"
		if a.RunnerUp != "" {
			alt = fmt.Sprintf("%s (p %.4f)", a.RunnerUp, a.PRunnerUp)
		}
		if _, err := fmt.Fprintf(w, "  %s: %s (p %.4f), runner-up %s, no match p %.4f\n", a.Cell, a.Candidate, a.PMatch, alt, a.PNone); err != nil {
			return err
		}
	}
	return nil
}
