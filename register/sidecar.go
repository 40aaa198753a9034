package register

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"ferry/outfile"
	"ferry/transform"
)

// The sidecar's format name and version. A reader refuses another name and
// a newer version.
const (
	SidecarFormat  = "ferry-table"
	SidecarVersion = 1
)

// SidecarSuffix is added to a table's path to name its sidecar:
// mapped.csv has mapped.csv.json beside it.
const SidecarSuffix = ".json"

// The frames and units a sidecar names.
const (
	FrameSource = "source"
	FrameTarget = "target"
	UnitsUM     = "um"
	UnitsVoxel  = "voxel"
)

// Coordinates says what a group of a table's columns holds: positions in
// the source or the target frame, in micrometres or in voxels of a given
// size.
type Coordinates struct {
	// Columns are the column names, x then y then z.
	Columns []string `json:"columns"`
	// Frame is FrameSource (the in vivo side) or FrameTarget (the EM side).
	Frame string `json:"frame"`
	// Units is UnitsUM or UnitsVoxel.
	Units string `json:"units"`
	// VoxelUM is the voxel size in µm per voxel along each column, when
	// Units is UnitsVoxel.
	VoxelUM []float64 `json:"voxel_um,omitempty"`
}

// CoordinatesIn describes columns in frame, in voxels of voxel or, when
// voxel is nil, in micrometres. dim is the number of columns.
func CoordinatesIn(columns []string, frame string, voxel *transform.Vec) Coordinates {
	c := Coordinates{Columns: columns, Frame: frame, Units: UnitsUM}
	if voxel != nil {
		c.Units = UnitsVoxel
		c.VoxelUM = append([]float64(nil), voxel[:len(columns)]...)
	}
	return c
}

// Sidecar is the JSON file beside every CSV table ferry writes: the table
// itself begins with its header row so that any CSV reader reads it, and
// what made it, and what its coordinate columns mean, is said here.
type Sidecar struct {
	Format  string `json:"format"`
	Version int    `json:"version"`
	// Table is the table's file name, without its folder.
	Table string `json:"table"`
	// TableSHA256 is the SHA-256 of the table's bytes: a sidecar whose
	// table has since changed is recognised as stale.
	TableSHA256 string `json:"table_sha256"`
	// Provenance is the provenance line, as the JSON outputs carry it.
	Provenance string   `json:"provenance"`
	Program    string   `json:"program"`
	Command    string   `json:"command"`
	Inputs     []Input  `json:"inputs"`
	Flags      []string `json:"flags"`
	// Coordinates say, for each group of position columns, their frame and
	// units. Columns not named here are not positions (errors and radii
	// carry their unit in their name).
	Coordinates []Coordinates `json:"coordinates"`
}

// SidecarPath is the path of the sidecar of the table at path.
func SidecarPath(table string) string { return table + SidecarSuffix }

// WriteTable writes a CSV table and its sidecar whole or not at all (see
// outfile): fill writes the table, beginning with its header row;
// the sidecar records prov, the table's checksum and coords.
func WriteTable(ctx context.Context, path string, prov Provenance, coords []Coordinates, fill func(w io.Writer) error) error {
	if outfile.IsStream(path) {
		// A device or pipe (/dev/stdout) takes the table alone: a sidecar
		// beside it would be a file in /dev.
		return outfile.Write(ctx, path, fill)
	}
	h := sha256.New()
	table := outfile.File{Path: path, Fill: func(w io.Writer) error {
		return fill(io.MultiWriter(w, h))
	}}
	side := outfile.File{Path: SidecarPath(path), Fill: func(w io.Writer) error {
		data, err := prov.Sidecar(filepath.Base(path), hex.EncodeToString(h.Sum(nil)), coords).Marshal()
		if err != nil {
			return err
		}
		_, err = w.Write(data)
		return err
	}}
	return outfile.WriteFiles(ctx, table, side)
}

// Sidecar is the sidecar of a table named table whose bytes have the
// SHA-256 sum.
func (p Provenance) Sidecar(table, sum string, coords []Coordinates) Sidecar {
	s := Sidecar{
		Format: SidecarFormat, Version: SidecarVersion, Table: table, TableSHA256: sum,
		Provenance: p.Line(), Program: "ferry " + Version, Command: p.Command,
		Inputs: p.Inputs, Flags: p.Flags, Coordinates: coords,
	}
	if s.Inputs == nil {
		s.Inputs = []Input{}
	}
	if s.Flags == nil {
		s.Flags = []string{}
	}
	if s.Coordinates == nil {
		s.Coordinates = []Coordinates{}
	}
	return s
}

// Marshal is the sidecar as indented JSON with a final line break.
func (s Sidecar) Marshal() ([]byte, error) {
	data, err := json.MarshalIndent(s, "", "  ")
	if err != nil {
		return nil, err
	}
	return append(data, '\n'), nil
}

// ErrNoSidecar is returned by ReadSidecar when the table has no sidecar.
var ErrNoSidecar = errors.New("no sidecar")

// ReadSidecar reads the sidecar of the table at path whose bytes are data.
// It returns an error wrapping ErrNoSidecar when there is none, and refuses
// a sidecar of another format, a newer version, or one whose checksum does
// not match data (the table changed after it was written).
func ReadSidecar(path string, data []byte) (*Sidecar, error) {
	sp := SidecarPath(path)
	raw, err := os.ReadFile(sp)
	if errors.Is(err, os.ErrNotExist) {
		return nil, fmt.Errorf("%s: %w", sp, ErrNoSidecar)
	}
	if err != nil {
		return nil, fmt.Errorf("cannot read %s: %w", sp, err)
	}
	var s Sidecar
	dec := json.NewDecoder(bytes.NewReader(raw))
	if err := dec.Decode(&s); err != nil {
		return nil, fmt.Errorf("%s: not a ferry table sidecar: %v", sp, err)
	}
	if s.Format != SidecarFormat {
		return nil, fmt.Errorf("%s: format %q, want %q", sp, s.Format, SidecarFormat)
	}
	if s.Version < 1 || s.Version > SidecarVersion {
		return nil, fmt.Errorf("%s: version %d; this ferry reads versions up to %d", sp, s.Version, SidecarVersion)
	}
	sum := sha256.Sum256(data)
	if got := hex.EncodeToString(sum[:]); got != s.TableSHA256 {
		return nil, fmt.Errorf("%s describes a table with sha256 %s, but %s has sha256 %s: the table changed after it was written; delete the sidecar or write the table again", sp, s.TableSHA256, path, got)
	}
	for _, c := range s.Coordinates {
		if c.Frame != FrameSource && c.Frame != FrameTarget {
			return nil, fmt.Errorf("%s: frame %q, want %q or %q", sp, c.Frame, FrameSource, FrameTarget)
		}
		switch {
		case c.Units == UnitsUM:
		case c.Units == UnitsVoxel && len(c.VoxelUM) == len(c.Columns):
		default:
			return nil, fmt.Errorf("%s: columns %v in units %q with voxel size %v: want %q, or %q with one size per column", sp, c.Columns, c.Units, c.VoxelUM, UnitsUM, UnitsVoxel)
		}
	}
	return &s, nil
}

// CoordinatesOf returns the sidecar's description of the group whose first
// column is first, and whether there is one.
func (s *Sidecar) CoordinatesOf(first string) (Coordinates, bool) {
	for _, c := range s.Coordinates {
		if len(c.Columns) > 0 && c.Columns[0] == first {
			return c, true
		}
	}
	return Coordinates{}, false
}

// PositionUnits says in what units the columns x, y, z of the table at
// path hold positions in frame: the voxel size its sidecar records (nil for
// micrometres). Without a usable sidecar it returns assumed, and a note
// saying what was assumed and why, for the user to hear. A sidecar that
// puts x, y, z in the other frame is an error.
func PositionUnits(path, frame string, assumed *transform.Vec) (voxel *transform.Vec, note string, err error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, "", fmt.Errorf("cannot read %s: %w", path, err)
	}
	side, err := ReadSidecar(path, data)
	if err == nil {
		c, ok := side.CoordinatesOf("x")
		switch {
		case !ok:
			err = fmt.Errorf("%s says nothing of the columns x, y, z", SidecarPath(path))
		case c.Frame != frame:
			return nil, "", fmt.Errorf("%s: x, y, z are %s positions (its sidecar says so), where %s positions are needed", path, c.Frame, frame)
		case c.Units == UnitsUM:
			return nil, "", nil
		default:
			var v transform.Vec
			copy(v[:], c.VoxelUM)
			return &v, "", nil
		}
	}
	why := "no sidecar"
	if !errors.Is(err, ErrNoSidecar) {
		why = "the sidecar is ignored (" + err.Error() + ")"
	}
	if assumed == nil {
		return nil, fmt.Sprintf("%s: %s: x, y, z are taken to be %s positions in µm", path, why, frame), nil
	}
	return assumed, fmt.Sprintf("%s: %s: x, y, z are taken to be %s voxels of %g × %g × %g µm, the transform's", path, why, frame, assumed[0], assumed[1], assumed[2]), nil
}
