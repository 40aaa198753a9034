package match

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"ferry/landmarks"
	"ferry/status"
	"ferry/transform"
)

// Row is one row of the table of `ferry match` as read back (ReadMatchesTable).
// Numbers left empty in the table are NaN.
type Row struct {
	ID, Candidate string
	PMatch        float64
	DistanceUM    float64
	RunnerUp      string
	PRunnerUp     float64
	// PNone is the probability that the cell has no counterpart, from the
	// optional p_none column (NaN without it).
	PNone  float64
	Status status.Status
	// Cell and CandidatePos are the target coordinates of the mapped cell
	// and of its candidate from the optional columns cell_x_um … and
	// candidate_x_um … (or cell_x_vox …, in target voxels: see InVoxels);
	// CellPlaced and CandidatePlaced say whether the row gives them.
	Cell, CandidatePos          transform.Vec
	CellPlaced, CandidatePlaced bool
	// InVoxels says the coordinates are target voxel indices.
	InVoxels bool
	// R95 is the optional r95_um (NaN when absent or empty).
	R95 float64
}

// ReadMatchesTable reads the table of `ferry match` (WriteMatchesTable's) by column name: id,
// candidate, p_match, distance_um, runner_up, p_runner_up and status, and
// when present p_none, r95_um and the target coordinates cell_x_um …
// candidate_z_um (or cell_x_vox …); any other column is ignored.
func ReadMatchesTable(path string) ([]Row, error) {
	t, err := landmarks.ReadTable(path)
	if err != nil {
		return nil, err
	}
	cols, err := t.Require("id", "candidate", "p_match", "distance_um", "runner_up", "p_runner_up", "status")
	if err != nil {
		return nil, err
	}
	none := t.Column("p_none")
	r95 := t.Column("r95_um")
	unit, inVoxels := "_um", false
	if t.Column("cell_x_um") < 0 && t.Column("cell_x_vox") >= 0 {
		unit, inVoxels = "_vox", true
	}
	var cellCols, candCols []int
	for _, a := range []string{"x", "y", "z"} {
		if c := t.Column("cell_" + a + unit); c >= 0 {
			cellCols = append(cellCols, c)
		}
		if c := t.Column("candidate_" + a + unit); c >= 0 {
			candCols = append(candCols, c)
		}
	}
	out := make([]Row, t.Len())
	for r := range t.Len() {
		m := Row{PNone: math.NaN(), R95: math.NaN(), InVoxels: inVoxels,
			ID:        t.Field(r, cols[0]),
			Candidate: t.Field(r, cols[1]),
			RunnerUp:  t.Field(r, cols[4]),
			Status:    status.Status(strings.ToLower(t.Field(r, cols[6]))),
		}
		if m.ID == "" {
			return nil, t.Fail(r, cols[0], "empty id: every row needs one")
		}
		if !m.Status.IsMatching() {
			return nil, t.Fail(r, cols[6], fmt.Sprintf("%s is not a match status: want matched, ambiguous or unmatched", strconv.Quote(string(m.Status))))
		}
		for _, f := range []struct {
			col int
			dst *float64
		}{{cols[2], &m.PMatch}, {cols[3], &m.DistanceUM}, {cols[5], &m.PRunnerUp}} {
			if *f.dst, _, err = t.Number(r, f.col); err != nil {
				return nil, err
			}
		}
		if none >= 0 {
			if m.PNone, _, err = t.Number(r, none); err != nil {
				return nil, err
			}
		}
		if r95 >= 0 {
			if m.R95, _, err = t.Number(r, r95); err != nil {
				return nil, err
			}
		}
		for _, f := range []struct {
			cols   []int
			dst    *transform.Vec
			placed *bool
		}{{cellCols, &m.Cell, &m.CellPlaced}, {candCols, &m.CandidatePos, &m.CandidatePlaced}} {
			if len(f.cols) < 2 {
				continue
			}
			all := true
			for k, c := range f.cols {
				v, ok, err := t.Number(r, c)
				if err != nil {
					return nil, err
				}
				all = all && ok
				f.dst[k] = v
			}
			*f.placed = all
		}
		out[r] = m
	}
	return out, nil
}
