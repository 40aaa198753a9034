package landmarks

import (
	"io"

	"ferry/transform"
)

// Point is one row of a cells or candidates table.
type Point struct {
	ID string
	// Pos is the position, in micrometres (or voxel indices until
	// ScaleVoxels is called). Z is zero in 2-D.
	Pos transform.Vec
	// Line is the physical line of the file the point was read from.
	Line int
	// Extra holds the row's values of the set's ExtraColumns, as read.
	Extra []string
}

// PointSet is a cells or candidates file as read.
type PointSet struct {
	// Path is the file name as the user gave it.
	Path string
	// Dim is 3, or 2 when the file has no z column.
	Dim    int
	Points []Point
	// ExtraColumns names the columns beyond id, x, y and z, in file order,
	// as spelt in the header.
	ExtraColumns []string
	// SHA256 is the hex SHA-256 of the raw bytes of the file.
	SHA256 string
}

// ReadPoints reads and checks the table of points at path: cells or
// candidates, as what says ("cells", "candidates"), which is used in
// messages. Every fault of the file is reported as an *InputError.
func ReadPoints(path, what string) (*PointSet, error) {
	return parseFile(path, func(name string, r io.Reader) (*PointSet, error) {
		return ParsePoints(name, what, r)
	})
}

// ParsePoints reads and checks a table of points from r; name is the file
// name used in messages and in PointSet.Path, what says what the points are
// ("cells", "candidates"). Every fault of the table is reported as an
// *InputError.
func ParsePoints(name, what string, r io.Reader) (*PointSet, error) {
	if what == "" {
		what = "points"
	}
	t, err := openTable(name, r)
	if err != nil {
		return nil, err
	}
	hint := ""
	if t.column("source_x") >= 0 || t.column("target_x") >= 0 {
		hint = "this looks like a landmark pairs table, not " + what
	}
	cols, err := t.require(hint, "id", "x", "y")
	if err != nil {
		return nil, err
	}
	idCol := cols[0]
	posCols := []int{cols[1], cols[2], t.column("z")}
	dim := 3
	if posCols[2] < 0 {
		dim = 2
	} else {
		cols = append(cols, posCols[2])
	}
	extraCols := t.extras(cols...)

	set := &PointSet{Path: name, Dim: dim, ExtraColumns: t.names(extraCols)}
	seen := make(map[string]int)
	var block stringBlock
	for {
		ok, err := t.nextRow()
		if err != nil {
			return nil, err
		}
		if !ok {
			break
		}
		p := Point{Line: t.line(0)}
		if p.ID, err = t.id(idCol, seen); err != nil {
			return nil, err
		}
		for a := range dim {
			if p.Pos[a], err = t.number(posCols[a]); err != nil {
				return nil, err
			}
		}
		p.Extra = t.extraValues(&block, extraCols, &p.ID)
		seen[p.ID] = p.Line
		set.Points = append(set.Points, p)
		set.Points, seen = sized(t, set.Points, seen)
	}
	if len(set.Points) == 0 {
		return nil, &InputError{File: name, Msg: "no " + what + ": the header is not followed by any rows"}
	}
	set.SHA256 = t.text.SHA256()
	return set, nil
}

// ScaleVoxels turns voxel indices into micrometres, in place: each
// coordinate is multiplied by the voxel size v along its axis. Call it once,
// right after reading.
func (s *PointSet) ScaleVoxels(v transform.Vec) {
	for i := range s.Points {
		p := &s.Points[i]
		for a := range 3 {
			p.Pos[a] *= v[a]
		}
	}
}
