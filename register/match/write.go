package match

import (
	"context"
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"ferry/landmarks"
	"ferry/register"
	"ferry/status"
	"ferry/transform"
)

// Columns are the columns WriteMatches writes first, before the target
// coordinates (see CoordinateColumns) and the cells' own extra columns.
var Columns = []string{"id", "candidate", "p_match", "distance_um", "runner_up", "p_runner_up", "status", "p_none"}

// WriteMatchesTable writes the matches to path with their sidecar (see
// register.Sidecar) whole or not at all: the table of WriteMatches, with
// prov beside it and the frame and units of its coordinate columns (target
// µm, or target voxels of voxel when it is not nil).
func WriteMatchesTable(ctx context.Context, path string, prov register.Provenance, cells *landmarks.PointSet, cands *landmarks.PointSet, res []Result, voxel *transform.Vec) error {
	cols := CoordinateColumns(cells.Dim, voxel)
	coords := []register.Coordinates{
		register.CoordinatesIn(cols[:cells.Dim], register.FrameTarget, voxel),
		register.CoordinatesIn(cols[cells.Dim:2*cells.Dim], register.FrameTarget, voxel),
	}
	return register.WriteTable(ctx, path, prov, coords, func(w io.Writer) error {
		return WriteMatches(w, cells, cands, res, voxel)
	})
}

// CoordinateColumns are the columns WriteMatches writes after Columns: the
// mapped cell's and the candidate's target coordinates, then the cell's
// 95 % radius. The coordinates are micrometres (suffix _um) or, when the
// transform records target voxel sizes, target voxel indices (suffix _vox);
// a 2-D table has no z columns.
func CoordinateColumns(dim int, voxel *transform.Vec) []string {
	unit := "_um"
	if voxel != nil {
		unit = "_vox"
	}
	var cols []string
	for _, who := range []string{"cell_", "candidate_"} {
		for _, a := range []string{"x", "y", "z"}[:dim] {
			cols = append(cols, who+a+unit)
		}
	}
	return append(cols, "r95_um")
}

// WriteMatches writes the matches in the columns of docs/formats.md, header row
// first: id, candidate (empty when none),
// p_match (the posterior probability that the cell is the candidate named;
// empty when none is named, where p_none says how likely no counterpart
// is), distance_um, runner_up (empty when none), p_runner_up (0 when none),
// status, then p_none (the posterior probability that the cell has no
// counterpart among the candidates), the target coordinates of the mapped
// cell and of the candidate with the cell's r95_um (CoordinateColumns;
// empty where there is no candidate or no mapped position), decision
// ("accepted" or "none" where a person's decision settled the cell, see
// Options.Decisions) and the cells' own extra columns. Probabilities have four decimals; distances and
// coordinates are written to the tenth of a nanometre. res is Match's
// result for cells and cands, in their order; cands holds the candidates as
// read, so their coordinates are written as they were given. voxel, when
// not nil, is the target voxel size (µm) of the transform: the mapped
// positions are then written in target voxels, as the candidates are.
func WriteMatches(w io.Writer, cells *landmarks.PointSet, cands *landmarks.PointSet, res []Result, voxel *transform.Vec) error {
	if len(res) != len(cells.Points) {
		return fmt.Errorf("match: %d results for %d cells", len(res), len(cells.Points))
	}
	cw := csv.NewWriter(w)
	dim := cells.Dim
	own := append(append(append([]string(nil), Columns...), CoordinateColumns(dim, voxel)...), "decision")
	header := append(own, landmarks.KeptColumnNames(own, cells.ExtraColumns)...)
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
		pMatch := ""
		if r.Candidate >= 0 {
			pMatch = formatP(r.PMatch)
		}
		row = append(row[:0], c.ID, cand, pMatch, formatDistance(r.DistanceUM), runner, formatP(r.PRunnerUp), string(r.Status), formatP(r.PNone))
		mapped := r.Mapped.Status != status.NoInverse && r.Mapped.Pos.IsFinite()
		for k := range dim {
			v := ""
			if mapped {
				x := r.Mapped.Pos[k]
				if voxel != nil {
					x /= voxel[k]
				}
				v = formatCoord(x)
			}
			row = append(row, v)
		}
		for k := range dim {
			v := ""
			if r.Candidate >= 0 {
				v = formatCoord(cands.Points[r.Candidate].Pos[k])
			}
			row = append(row, v)
		}
		r95 := ""
		if mapped && r.Mapped.R95 > 0 && !math.IsInf(r.Mapped.R95, 0) {
			r95 = formatCoord(r.Mapped.R95)
		}
		row = append(row, r95, r.Decision)
		row = append(row, c.Extra...)
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// formatCoord writes a coordinate to the tenth of a nanometre (or of a
// voxel), never "-0.0000".
func formatCoord(x float64) string {
	s := strconv.FormatFloat(x, 'f', 4, 64)
	if s == "-0.0000" {
		return "0.0000"
	}
	return s
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
		case status.Matched:
			s.Matched++
		case status.Ambiguous:
			s.Ambiguous++
			cand, runner, err := candidateIDs(cands, r)
			if err != nil {
				return Summary{}, fmt.Errorf("match: cell %q: %v", cells.Points[i].ID, err)
			}
			s.AmbiguousCells = append(s.AmbiguousCells, Ambiguity{
				Cell: cells.Points[i].ID, Candidate: cand, RunnerUp: runner,
				PMatch: r.PMatch, PRunnerUp: r.PRunnerUp, PNone: r.PNone,
			})
		case status.Unmatched:
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
