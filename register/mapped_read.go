package register

import (
	"bytes"
	"errors"
	"fmt"
	"os"

	"ferry/landmarks"
	"ferry/status"
	"ferry/transform"
)

// The reader of the table that WriteMappedTable writes (table.go), for the
// report and any other program that reads the cells back.

// MappedCell is one row of the table of `ferry map` as read back.
type MappedCell struct {
	ID string
	// Target is the mapped position in target micrometres; Placed is false
	// where the table gives none (status no_inverse).
	Target transform.Vec
	Placed bool
	// R95 is the row's r95_um (NaN when empty).
	R95    float64
	Status status.Status
}

// MappedTable is the table of `ferry map` as read back (ReadMappedTable).
type MappedTable struct {
	Cells []MappedCell
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
//   - the table's sidecar (path + ".json", see Sidecar): x, y, z
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
	inverse := &landmarks.InputError{File: path, Msg: "holds source positions (cells mapped back from the target): want cells mapped forward into the target"}
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
	cells := make([]MappedCell, t.Len())
	for r := range t.Len() {
		c := MappedCell{ID: t.Field(r, cols[0]), Status: status.Status(t.Field(r, cols[4]))}
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
	side, err := ReadSidecar(t.Name(), data)
	var ignored string
	switch {
	case err == nil:
		if c, ok := side.CoordinatesOf("x"); ok {
			if c.Frame != FrameTarget {
				return nil, nil, inverse
			}
			idx, err := t.Require(c.Columns...)
			if err != nil {
				return nil, nil, err
			}
			if c.Units == UnitsUM {
				return idx, nil, nil
			}
			var v transform.Vec
			copy(v[:], c.VoxelUM)
			return idx, &v, nil
		}
		ignored = SidecarPath(t.Name()) + " says nothing of the columns x, y, z"
	case errors.Is(err, ErrNoSidecar):
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
	if idx := um(FrameTarget); idx != nil {
		if ignored != "" {
			note("positions taken from the columns target_*_um")
		}
		return idx, nil, nil
	}
	if um(FrameSource) != nil {
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

// unwrapPath drops the operation and path of an *os.PathError, which the
// caller's message already names.
func unwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}
