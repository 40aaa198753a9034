package report

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"

	"ferry/landmarks"
	"ferry/register"
	"ferry/status"
	"ferry/transform"
)

// Cell is one row of the table of `ferry map`.
type Cell struct {
	ID string
	// Target is the mapped position in target micrometres; Placed is false
	// where the table gives none (status no_inverse).
	Target transform.Vec
	Placed bool
	// R95 is the row's r95_um (NaN when empty).
	R95    float64
	Status status.Status
}

// Match is one row of the table of `ferry match`. Numbers left empty in the
// table are NaN.
type Match struct {
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

// ReadMapped is ReadMappedTable's cells and dimension.
func ReadMapped(path string, targetVoxel *transform.Vec) (cells []Cell, dim int, err error) {
	m, err := ReadMappedTable(path, targetVoxel)
	if err != nil {
		return nil, 0, err
	}
	return m.Cells, m.Dim, nil
}

// MappedTable is the table of `ferry map` as the report reads it.
type MappedTable struct {
	Cells []Cell
	Dim   int
	// Assumed, when not empty, says what the reader had to assume about
	// the frame or units of the positions, for the user to hear.
	Assumed string
}

// ReadMappedTable reads the mapped cells written by `ferry map`, by column
// name: id, x, y, z (absent in 2-D), r95_um and status; positions are
// returned in target micrometres. The frame and units of the positions come
// from the data, in this order:
//
//   - the table's sidecar (path + ".json", see register.Sidecar): x, y, z
//     in target µm or target voxels of the size it records;
//   - without a usable sidecar, the columns target_x_um, target_y_um,
//     target_z_um that map writes beside x, y, z;
//   - without either (a table made by hand or by an older ferry), x, y, z
//     are assumed to be target positions, in voxels of targetVoxel when it
//     is not nil (as map writes them for a transform fitted in voxels) and
//     in µm otherwise; Assumed says so.
//
// A table of source positions (mapped backwards: a sidecar naming the
// source frame, or source_x_um columns) is refused: the report draws cells
// mapped forward into the target. Comment lines are never read for the
// frame: what a table holds is stated in its data.
func ReadMappedTable(path string, targetVoxel *transform.Vec) (*MappedTable, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("cannot read %s: %w", path, unwrapPath(err))
	}
	t, err := landmarks.ParseTable(path, bytes.NewReader(data))
	if err != nil {
		return nil, err
	}
	cols, err := t.Require("id", "r95_um", "status")
	if err != nil {
		return nil, err
	}
	inverse := &landmarks.InputError{File: path, Msg: "holds source positions (written by ferry map --inverse): the report draws cells mapped forward into the target"}
	out := &MappedTable{}
	pos, scale, err := mappedPositions(t, data, targetVoxel, out, inverse)
	if err != nil {
		return nil, err
	}
	dim := len(pos)
	out.Dim = dim
	cols = []int{cols[0], pos[0], pos[1], cols[1], cols[2]}
	axes := []int{pos[0], pos[1], -1}
	if dim == 3 {
		axes[2] = pos[2]
	}
	targetVoxel = scale
	cells := make([]Cell, t.Len())
	for r := range t.Len() {
		c := Cell{ID: t.Field(r, cols[0]), Status: status.Status(t.Field(r, cols[4]))}
		if c.ID == "" {
			return nil, t.Fail(r, cols[0], "empty id: every row needs one")
		}
		empty := 0
		for k := range dim {
			v, ok, err := t.Number(r, axes[k])
			if err != nil {
				return nil, err
			}
			if !ok {
				empty++
				continue
			}
			if targetVoxel != nil {
				v *= targetVoxel[k]
			}
			c.Target[k] = v
		}
		switch empty {
		case 0:
			c.Placed = true
		case dim:
		default:
			return nil, t.Fail(r, axes[0], "some coordinates of the row are empty and some are not: give all or none")
		}
		if c.R95, _, err = t.Number(r, cols[3]); err != nil {
			return nil, err
		}
		cells[r] = c
	}
	out.Cells = cells
	return out, nil
}

// mappedPositions finds the columns of the mapped positions and their
// voxel size (nil: µm) as ReadMappedTable describes, noting in out what it
// had to assume.
func mappedPositions(t *landmarks.Table, data []byte, targetVoxel *transform.Vec, out *MappedTable, inverse error) ([]int, *transform.Vec, error) {
	side, err := register.ReadSidecar(t.Name(), data)
	var ignored string
	switch {
	case err == nil:
		if c, ok := side.CoordinatesOf("x"); ok {
			if c.Frame != register.FrameTarget {
				return nil, nil, inverse
			}
			idx, err := t.Require(c.Columns...)
			if err != nil {
				return nil, nil, err
			}
			if c.Units == register.UnitsUM {
				return idx, nil, nil
			}
			var v transform.Vec
			copy(v[:], c.VoxelUM)
			return idx, &v, nil
		}
		ignored = register.SidecarPath(t.Name()) + " says nothing of the columns x, y, z"
	case errors.Is(err, register.ErrNoSidecar):
	default:
		ignored = err.Error()
	}
	um := func(frame string) []int {
		var idx []int
		for _, a := range []string{"x", "y", "z"} {
			if i := t.Column(frame + "_" + a + "_um"); i >= 0 {
				idx = append(idx, i)
			}
		}
		if len(idx) < 2 {
			return nil
		}
		return idx
	}
	note := func(msg string) {
		if ignored != "" {
			msg = "the sidecar is ignored (" + ignored + "); " + msg
		}
		out.Assumed = t.Name() + ": " + msg
	}
	if idx := um(register.FrameTarget); idx != nil {
		if ignored != "" {
			note("positions taken from the columns target_*_um")
		}
		return idx, nil, nil
	}
	if um(register.FrameSource) != nil {
		return nil, nil, inverse
	}
	idx, err := t.Require("x", "y")
	if err != nil {
		return nil, nil, err
	}
	if z := t.Column("z"); z >= 0 {
		idx = append(idx, z)
	}
	if targetVoxel != nil {
		note(fmt.Sprintf("no sidecar and no target_*_um columns: x, y, z are taken to be target voxels of %g × %g × %g µm, the transform's target voxel size", targetVoxel[0], targetVoxel[1], targetVoxel[2]))
	} else {
		note("no sidecar and no target_*_um columns: x, y, z are taken to be target positions in µm")
	}
	return idx, targetVoxel, nil
}

// ReadMatches reads the table of `ferry match` by column name: id,
// candidate, p_match, distance_um, runner_up, p_runner_up and status, and
// when present p_none, r95_um and the target coordinates cell_x_um …
// candidate_z_um (or cell_x_vox …); any other column is ignored.
func ReadMatches(path string) ([]Match, error) {
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
	out := make([]Match, t.Len())
	for r := range t.Len() {
		m := Match{PNone: math.NaN(), R95: math.NaN(), InVoxels: inVoxels,
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

// unwrapPath drops the operation and path of an *os.PathError, which the
// caller's message already names.
func unwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}
