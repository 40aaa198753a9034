package report

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
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
// A table of source positions (`ferry map --inverse`: a sidecar naming the
// source frame, source_x_um columns, or an older table whose comment line
// records --inverse=true) is refused: the report draws cells mapped
// forward into the target.
func ReadMappedTable(path string, targetVoxel *transform.Vec) (*MappedTable, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("cannot read %s: %w", path, unwrapPath(err))
	}
	t, err := parseTable(path, data)
	if err != nil {
		return nil, err
	}
	cols, err := t.require("id", "r95_um", "status")
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
	cells := make([]Cell, len(t.rows))
	for r, row := range t.rows {
		c := Cell{ID: strings.TrimSpace(row[cols[0]]), Status: status.Status(strings.TrimSpace(row[cols[4]]))}
		if c.ID == "" {
			return nil, t.fail(r, cols[0], "empty id: every row needs one")
		}
		empty := 0
		for k := range dim {
			v, ok, err := t.number(r, axes[k])
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
			return nil, t.fail(r, axes[0], "some coordinates of the row are empty and some are not: give all or none")
		}
		if c.R95, _, err = t.number(r, cols[3]); err != nil {
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
func mappedPositions(t *table, data []byte, targetVoxel *transform.Vec, out *MappedTable, inverse error) ([]int, *transform.Vec, error) {
	side, err := register.ReadSidecar(t.name, data)
	var ignored string
	switch {
	case err == nil:
		if c, ok := side.CoordinatesOf("x"); ok {
			if c.Frame != register.FrameTarget {
				return nil, nil, inverse
			}
			idx, err := t.require(c.Columns...)
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
		ignored = register.SidecarPath(t.name) + " says nothing of the columns x, y, z"
	case errors.Is(err, register.ErrNoSidecar):
	default:
		ignored = err.Error()
	}
	um := func(frame string) []int {
		var idx []int
		for _, a := range []string{"x", "y", "z"} {
			if i := t.column(frame + "_" + a + "_um"); i >= 0 {
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
		out.Assumed = t.name + ": " + msg
	}
	if idx := um(register.FrameTarget); idx != nil {
		if ignored != "" {
			note("positions taken from the columns target_*_um")
		}
		return idx, nil, nil
	}
	if um(register.FrameSource) != nil || t.mentions("--inverse=true") {
		return nil, nil, inverse
	}
	idx, err := t.require("x", "y")
	if err != nil {
		return nil, nil, err
	}
	if z := t.column("z"); z >= 0 {
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
	t, err := readTable(path)
	if err != nil {
		return nil, err
	}
	cols, err := t.require("id", "candidate", "p_match", "distance_um", "runner_up", "p_runner_up", "status")
	if err != nil {
		return nil, err
	}
	none := t.column("p_none")
	r95 := t.column("r95_um")
	unit, inVoxels := "_um", false
	if t.column("cell_x_um") < 0 && t.column("cell_x_vox") >= 0 {
		unit, inVoxels = "_vox", true
	}
	var cellCols, candCols []int
	for _, a := range []string{"x", "y", "z"} {
		if c := t.column("cell_" + a + unit); c >= 0 {
			cellCols = append(cellCols, c)
		}
		if c := t.column("candidate_" + a + unit); c >= 0 {
			candCols = append(candCols, c)
		}
	}
	out := make([]Match, len(t.rows))
	for r, row := range t.rows {
		m := Match{PNone: math.NaN(), R95: math.NaN(), InVoxels: inVoxels,
			ID:        strings.TrimSpace(row[cols[0]]),
			Candidate: strings.TrimSpace(row[cols[1]]),
			RunnerUp:  strings.TrimSpace(row[cols[4]]),
			Status:    status.Status(strings.ToLower(strings.TrimSpace(row[cols[6]]))),
		}
		if m.ID == "" {
			return nil, t.fail(r, cols[0], "empty id: every row needs one")
		}
		if !m.Status.IsMatching() {
			return nil, t.fail(r, cols[6], fmt.Sprintf("%s is not a match status: want matched, ambiguous or unmatched", strconv.Quote(string(m.Status))))
		}
		for _, f := range []struct {
			col int
			dst *float64
		}{{cols[2], &m.PMatch}, {cols[3], &m.DistanceUM}, {cols[5], &m.PRunnerUp}} {
			if *f.dst, _, err = t.number(r, f.col); err != nil {
				return nil, err
			}
		}
		if none >= 0 {
			if m.PNone, _, err = t.number(r, none); err != nil {
				return nil, err
			}
		}
		if r95 >= 0 {
			if m.R95, _, err = t.number(r, r95); err != nil {
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
				v, ok, err := t.number(r, c)
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

// table is a CSV file of the contract read whole: a header naming the
// columns (found in any case and order), rows of as many fields, "#"
// comment lines, an optional byte-order mark, LF or CRLF line ends.
type table struct {
	name     string
	header   []string
	columns  map[string]int
	rows     [][]string
	lines    []int
	comments []string
}

func readTable(path string) (*table, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("cannot read %s: %w", path, unwrapPath(err))
	}
	return parseTable(path, data)
}

func parseTable(name string, data []byte) (*table, error) {
	data = bytes.TrimPrefix(data, []byte("\xef\xbb\xbf"))
	t := &table{name: name, columns: map[string]int{}}
	for _, line := range bytes.Split(data, []byte("\n")) {
		if trimmed := bytes.TrimSpace(line); len(trimmed) > 0 && trimmed[0] == '#' {
			t.comments = append(t.comments, string(trimmed))
		}
	}
	r := csv.NewReader(bytes.NewReader(data))
	r.Comment = '#'
	r.FieldsPerRecord = -1
	r.TrimLeadingSpace = true
	for {
		rec, err := r.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			var pe *csv.ParseError
			if errors.As(err, &pe) {
				return nil, &landmarks.InputError{File: name, Line: pe.Line, Msg: pe.Err.Error()}
			}
			return nil, &landmarks.InputError{File: name, Msg: err.Error()}
		}
		line, _ := r.FieldPos(0)
		if t.header == nil {
			t.header = make([]string, len(rec))
			for i, h := range rec {
				h = strings.TrimSpace(h)
				key := strings.ToLower(h)
				if h == "" {
					return nil, &landmarks.InputError{File: name, Line: line, Msg: fmt.Sprintf("header column %d has no name", i+1)}
				}
				if _, dup := t.columns[key]; dup {
					return nil, &landmarks.InputError{File: name, Line: line, Column: h, Msg: "named twice in the header"}
				}
				t.header[i], t.columns[key] = h, i
			}
			continue
		}
		if len(rec) != len(t.header) {
			return nil, &landmarks.InputError{File: name, Line: line,
				Msg: fmt.Sprintf("the row has %d fields but the header has %d columns", len(rec), len(t.header))}
		}
		t.rows = append(t.rows, rec)
		t.lines = append(t.lines, line)
	}
	if t.header == nil {
		return nil, &landmarks.InputError{File: name, Msg: "no header row: want a header row naming the columns"}
	}
	return t, nil
}

// mentions reports whether a comment line holds s.
func (t *table) mentions(s string) bool {
	for _, c := range t.comments {
		if strings.Contains(c, s) {
			return true
		}
	}
	return false
}

func (t *table) column(name string) int {
	if i, ok := t.columns[name]; ok {
		return i
	}
	return -1
}

func (t *table) require(names ...string) ([]int, error) {
	idx := make([]int, len(names))
	for k, n := range names {
		if idx[k] = t.column(n); idx[k] < 0 {
			return nil, &landmarks.InputError{File: t.name, Column: n,
				Msg: "missing from the header, which has " + strings.Join(t.header, ", ")}
		}
	}
	return idx, nil
}

func (t *table) fail(row, col int, msg string) error {
	return &landmarks.InputError{File: t.name, Line: t.lines[row], Column: t.header[col], Msg: msg}
}

// number reads field col of row as a finite number; an empty field gives
// NaN and ok false.
func (t *table) number(row, col int) (v float64, ok bool, err error) {
	s := strings.TrimSpace(t.rows[row][col])
	if s == "" {
		return math.NaN(), false, nil
	}
	v, perr := strconv.ParseFloat(s, 64)
	if perr != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, false, t.fail(row, col, strconv.Quote(s)+" is not a number")
	}
	return v, true, nil
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
