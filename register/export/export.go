package export

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"

	"ferry/imaging"
	"ferry/internal/remedy"
	"ferry/outfile"
	"ferry/progress"
	"ferry/register"
	"ferry/transform"
)

// The files Write makes in its folder.
const (
	ManifestFile    = "export.json"
	AffineUMFile    = "affine_um.txt"
	AffineVoxelFile = "affine_voxel.txt"
	FieldTIFFFile   = "displacement_um.tif"
	FieldZarrFile   = "transform.zarr"
	PointsFile      = "points.csv"
)

// ManifestFormat names the manifest's format.
const (
	ManifestFormat  = "ferry-export"
	ManifestVersion = 1
)

// DefaultCheckPoints is the number of random points at which the sampling
// error is measured.
const DefaultCheckPoints = 2000

// Options say what Write writes.
type Options struct {
	// Grid chooses the displacement field's grid (splines only).
	Grid GridOptions
	// CheckPoints is the number of random points at which the sampling
	// error is measured (0: DefaultCheckPoints); Seed draws them.
	CheckPoints int
	Seed        uint64
	// Mapped, when not empty, is a table written by `ferry map` whose
	// cells are written as a target-voxel point list (PointsFile).
	Mapped string
	// TargetVoxel is the target voxel size (µm) for the point list when
	// the transform file records none.
	TargetVoxel *transform.Vec
	// Provenance says what asked for the export.
	Provenance register.Provenance
	// Progress reports the sampling of the field.
	Progress progress.Reporter
}

// Result is what Write wrote and measured.
type Result struct {
	Dir   string
	Files []string
	// Affine is the affine part in µm; AffineVoxel the same in voxels
	// when the transform file records a voxel size (nil otherwise).
	Affine, AffineVoxel *Homogeneous
	// Field is the sampled displacement field (nil for a linear model),
	// with its sampling errors: TotalError of x + D(x), SequenceError of
	// the OME-Zarr sequence A·(x + d(x)) + t.
	Field                     *Field
	TotalError, SequenceError SamplingError
	// Points and Unplaced count the cells of the point list written and
	// left out (no position in the mapped table).
	Points, Unplaced int
	// Notes say what had to be assumed, for the user to hear. A note's
	// String speaks of values (a box in source µm), never of the names a
	// caller gives the inputs it asks to change; cmd/ferry names them by
	// its flags, as it does in errors.
	Notes []fmt.Stringer
}

// Manifest is export.json.
type Manifest struct {
	Format        string        `json:"format"`
	Version       int           `json:"version"`
	Provenance    string        `json:"provenance"`
	Model         string        `json:"model"`
	Dim           int           `json:"dim"`
	Convention    string        `json:"convention"`
	Units         string        `json:"units"`
	AffineUM      [][]float64   `json:"affine_um"`
	AffineVoxel   [][]float64   `json:"affine_voxel,omitempty"`
	SourceVoxelUM *[3]float64   `json:"source_voxel_um,omitempty"`
	TargetVoxelUM *[3]float64   `json:"target_voxel_um,omitempty"`
	Field         *FieldRecord  `json:"displacement_field,omitempty"`
	Points        *PointsRecord `json:"points,omitempty"`
	Files         []string      `json:"files"`
}

// FieldRecord describes the displacement field in the manifest.
type FieldRecord struct {
	OriginUM      [3]float64    `json:"origin_um"`
	SpacingUM     [3]float64    `json:"spacing_um"`
	Size          [3]int        `json:"size"`
	TIFF          string        `json:"tiff"`
	TIFFLayout    string        `json:"tiff_layout"`
	Zarr          string        `json:"zarr"`
	ZarrLayout    string        `json:"zarr_layout"`
	TotalError    SamplingError `json:"sampling_error_tiff"`
	SequenceError SamplingError `json:"sampling_error_zarr"`
}

// PointsRecord describes the point list in the manifest.
type PointsRecord struct {
	File          string     `json:"file"`
	Count         int        `json:"count"`
	Unplaced      int        `json:"unplaced"`
	TargetVoxelUM [3]float64 `json:"target_voxel_um"`
}

// Write writes the export of file (read from transformPath) into dir:
// the affine part as plain text (in µm, and in voxels when the file
// records a voxel size) and in the manifest; for a spline the displacement
// field as a float32 TIFF and an OME-Zarr store; with opt.Mapped the point
// list. Every file appears whole or not at all.
func Write(ctx context.Context, dir string, file *register.Registration, opt Options) (*Result, error) {
	res := &Result{Dir: dir}
	a, t, err := transform.AffinePart(file.Transform)
	if err != nil {
		return nil, err
	}
	dim := file.Transform.Dim()
	aff := NewHomogeneous(a, t)
	res.Affine = &aff
	if file.Voxels.Source != nil || file.Voxels.Target != nil {
		v := aff.InVoxels(file.Voxels.Source, file.Voxels.Target)
		res.AffineVoxel = &v
	}
	m := Manifest{
		Format: ManifestFormat, Version: ManifestVersion, Provenance: opt.Provenance.Line(),
		Model: string(file.Transform.Kind()), Dim: dim, Convention: Convention, Units: "micrometre",
		AffineUM: aff.Rows(),
	}
	if file.Voxels.Source != nil {
		v := [3]float64(*file.Voxels.Source)
		m.SourceVoxelUM = &v
	}
	if file.Voxels.Target != nil {
		v := [3]float64(*file.Voxels.Target)
		m.TargetVoxelUM = &v
	}
	if res.AffineVoxel != nil {
		m.AffineVoxel = res.AffineVoxel.Rows()
	}
	var points *pointList
	if opt.Mapped != "" {
		vox := file.Voxels.Target
		if opt.TargetVoxel != nil {
			vox = opt.TargetVoxel
		}
		if points, err = readPoints(opt.Mapped, file.Voxels.Target, vox); err != nil {
			return nil, err
		}
		if points.dim != dim {
			return nil, fmt.Errorf("%s: %d-D mapped cells for a %d-D transform", opt.Mapped, points.dim, dim)
		}
		res.Points, res.Unplaced = len(points.rows), points.unplaced
		if points.note != "" {
			res.Notes = append(res.Notes, remedy.Sprintf("%s", points.note))
		}
		m.Points = &PointsRecord{File: PointsFile, Count: len(points.rows), Unplaced: points.unplaced, TargetVoxelUM: [3]float64(*vox)}
	}

	if s, ok := file.Transform.(*transform.Spline); ok {
		g, err := FieldGrid(s, opt.Grid)
		if err != nil {
			return nil, err
		}
		if res.Field, err = SampleField(ctx, s, a, t, g, opt.Progress); err != nil {
			return nil, err
		}
		n := opt.CheckPoints
		if n <= 0 {
			n = DefaultCheckPoints
		}
		res.TotalError, res.SequenceError = res.Field.Errors(s, g.RandomPoints(n, opt.Seed))
		if points != nil {
			if note := points.outsideNote(s, g); note.String() != "" {
				res.Notes = append(res.Notes, note)
			}
		}
		names, _ := ngffAxes(dim)
		m.Field = &FieldRecord{
			OriginUM: g.Origin, SpacingUM: g.Spacing, Size: g.Size,
			TIFF: FieldTIFFFile,
			TIFFLayout: fmt.Sprintf("float32 ImageJ hyperstack of %d planes × %d channels (D_x, D_y%s in µm), plane k at z = origin_um[2] + k·spacing_um[2]; x' = x + D(x)",
				g.Size[2], dim, map[bool]string{true: ", D_z", false: ""}[dim == 3]),
			Zarr: FieldZarrFile,
			ZarrLayout: fmt.Sprintf("OME-NGFF %s scene: sequence of displacements (%s/%s, axes c,%v, components in axis order) then affine; x' = A·(x + d(x)) + t",
				NGFFVersion, DisplacementsPath, ArrayPath, names),
			TotalError: res.TotalError, SequenceError: res.SequenceError,
		}
	}

	m.Files = append(m.Files, ManifestFile, AffineUMFile)
	if res.AffineVoxel != nil {
		m.Files = append(m.Files, AffineVoxelFile)
	}
	if res.Field != nil {
		m.Files = append(m.Files, FieldTIFFFile, FieldZarrFile)
	}
	if points != nil {
		m.Files = append(m.Files, PointsFile, register.SidecarPath(PointsFile))
	}
	res.Files = m.Files
	if err := refuseStale(dir, m.Files); err != nil {
		return nil, err
	}
	err = outfile.WriteDir(ctx, dir, func(tmp string) error {
		manifest, err := json.MarshalIndent(m, "", "  ")
		if err != nil {
			return err
		}
		if err := os.WriteFile(filepath.Join(tmp, ManifestFile), append(manifest, '\n'), 0o644); err != nil {
			return err
		}
		what := "affine part of the " + string(file.Transform.Kind()) + " transform, micrometres on both sides"
		if err := os.WriteFile(filepath.Join(tmp, AffineUMFile), []byte(aff.Text(what)), 0o644); err != nil {
			return err
		}
		if res.AffineVoxel != nil {
			what := fmt.Sprintf("affine part of the %s transform, from %s to %s", file.Transform.Kind(), sideUnits("source", file.Voxels.Source), sideUnits("target", file.Voxels.Target))
			if err := os.WriteFile(filepath.Join(tmp, AffineVoxelFile), []byte(res.AffineVoxel.Text(what)), 0o644); err != nil {
				return err
			}
		}
		if res.Field != nil {
			var buf bytes.Buffer
			if err := imaging.WriteFloat32TIFF(&buf, res.Field.TIFFStack()); err != nil {
				return err
			}
			if err := os.WriteFile(filepath.Join(tmp, FieldTIFFFile), buf.Bytes(), 0o644); err != nil {
				return err
			}
			if err := res.Field.WriteZarr(filepath.Join(tmp, FieldZarrFile)); err != nil {
				return err
			}
		}
		if points != nil {
			return points.write(ctx, filepath.Join(tmp, PointsFile), opt.Provenance)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	return res, nil
}

// refuseStale refuses to write into a folder that holds one of the files
// an export can write but this one does not: left beside the new files, an
// earlier export's displacement field or point list would pass for this
// one's. Nothing is removed without the user's word.
func refuseStale(dir string, writing []string) error {
	all := []string{ManifestFile, AffineUMFile, AffineVoxelFile, FieldTIFFFile, FieldZarrFile, PointsFile, register.SidecarPath(PointsFile)}
	for _, name := range all {
		if slices.Contains(writing, name) {
			continue
		}
		if _, err := os.Stat(filepath.Join(dir, name)); err == nil {
			return fmt.Errorf("%s holds %s, which this export does not write: left beside the new files it would pass for part of them; remove it or export into another folder", dir, name)
		}
	}
	return nil
}

func sideUnits(side string, voxel *transform.Vec) string {
	if voxel == nil {
		return side + " micrometres"
	}
	return fmt.Sprintf("%s voxel indices (voxels of %g × %g × %g µm)", side, voxel[0], voxel[1], voxel[2])
}

// TIFFStack is the total field as an ImageJ hyperstack: for each plane k,
// one page per component D_x, D_y (, D_z), in µm.
func (fd *Field) TIFFStack() *imaging.Float32Stack {
	g := fd.Grid
	s := &imaging.Float32Stack{
		Width: g.Size[0], Height: g.Size[1], Depth: g.Size[2], Channels: g.Dim,
		VoxelUM: g.Spacing, OriginUM: g.Origin,
		Description: "displacement D(x) = f(x) - x in µm, x' = x + D(x); see export.json",
	}
	s.Data = make([]float32, len(fd.Total))
	plane := g.Size[0] * g.Size[1]
	for k := range g.Size[2] {
		for c := range g.Dim {
			page := s.Data[(k*g.Dim+c)*plane:]
			for p := range plane {
				page[p] = fd.Total[(k*plane+p)*g.Dim+c]
			}
		}
	}
	return s
}

// pointList is the point list of the mapped cells.
type pointList struct {
	dim      int
	rows     []register.MappedCell
	voxel    transform.Vec
	unplaced int
	note     string
}

// readPoints reads the mapped table and keeps the placed cells, in target
// µm; vox is the voxel size they are to be written in.
func readPoints(path string, fileVoxel, vox *transform.Vec) (*pointList, error) {
	if vox == nil {
		return nil, remedy.Errorf("%s: the transform file records no target voxel size, so the point list has none to be written in: give %s (µm per voxel)",
			path, remedy.Ref{Input: remedy.TargetVoxel, Words: "a target voxel size", Form: "X,Y,Z"})
	}
	m, err := register.ReadMappedTable(path, fileVoxel)
	if err != nil {
		return nil, err
	}
	pl := &pointList{dim: m.Dim, voxel: *vox, note: m.Assumed}
	for _, c := range m.Cells {
		if !c.Placed {
			pl.unplaced++
			continue
		}
		pl.rows = append(pl.rows, c)
	}
	return pl, nil
}

// outsideNote counts the cells whose source position, t⁻¹ of their mapped
// position, lies outside the field's grid, where a program applying the
// field has no displacement to interpolate, and says how to cover them;
// empty when every cell is inside.
func (pl *pointList) outsideNote(t transform.Transform, g Grid) remedy.Message {
	end := g.End()
	outside := 0
	for _, c := range pl.rows {
		p, err := t.Invert(c.Target)
		if err != nil {
			outside++
			continue
		}
		for k := range g.Dim {
			if !(p[k] >= g.Origin[k]-1e-9 && p[k] <= end[k]+1e-9) {
				outside++
				break
			}
		}
	}
	if outside == 0 {
		return remedy.Message{}
	}
	box := fmt.Sprintf("x %.1f to %.1f, y %.1f to %.1f", g.Origin[0], end[0], g.Origin[1], end[1])
	flag := "X0,Y0,X1,Y1"
	if g.Dim == 3 {
		box += fmt.Sprintf(", z %.1f to %.1f", g.Origin[2], end[2])
		flag = "X0,Y0,Z0,X1,Y1,Z1"
	}
	verb := "lie"
	if outside == 1 {
		verb = "lies"
	}
	return remedy.Sprintf("%d of the %d mapped cells %s outside the displacement field's box (source %s µm), where a program applying the field finds no displacement; give %s in source µm (the in vivo stack's box, say) to cover them",
		outside, len(pl.rows), verb, box, remedy.Ref{Input: remedy.OutputBox, Words: "a box", Form: flag})
}

// PointColumns are the point list's columns in dim dimensions.
func PointColumns(dim int) []string {
	return append(append([]string{"id"}, []string{"x_voxel", "y_voxel", "z_voxel"}[:dim]...), "r95_um", "status")
}

// write writes the point list with its sidecar (register.WriteTable): id,
// the position in target voxel indices x_voxel, y_voxel (, z_voxel), r95_um
// and status.
func (pl *pointList) write(ctx context.Context, path string, prov register.Provenance) error {
	header := PointColumns(pl.dim)
	coords := []register.Coordinates{register.CoordinatesIn(header[1:1+pl.dim], register.FrameTarget, &pl.voxel)}
	return register.WriteTable(ctx, path, prov, coords, func(w io.Writer) error {
		cw := csv.NewWriter(w)
		if err := cw.Write(header); err != nil {
			return err
		}
		for _, c := range pl.rows {
			row := []string{c.ID}
			for k := range pl.dim {
				v := strconv.FormatFloat(c.Target[k]/pl.voxel[k], 'f', 4, 64)
				if v == "-0.0000" {
					v = "0.0000"
				}
				row = append(row, v)
			}
			r95 := ""
			if !math.IsNaN(c.R95) {
				r95 = strconv.FormatFloat(c.R95, 'f', 4, 64)
			}
			if err := cw.Write(append(row, r95, string(c.Status))); err != nil {
				return err
			}
		}
		cw.Flush()
		return cw.Error()
	})
}
