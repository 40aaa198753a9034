package export

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
)

// NGFFVersion is the OME-NGFF version the store's metadata follow, as the
// specification's schemas spell it (OME-NGFF specification 0.6,
// ome/ngff-spec, schemas/_version.schema).
const NGFFVersion = "0.6rc0"

// The names inside the store.
const (
	// DisplacementsPath is the group of the displacement field, relative
	// to the store's root, as the `displacements` transformation names it.
	DisplacementsPath = "coordinateTransformations/displacements"
	// ArrayPath is the array inside that group (its one scale level).
	ArrayPath = "s0"
	// SourceSystem and TargetSystem name the coordinate systems.
	SourceSystem = "source"
	TargetSystem = "target"
)

// ngffAxes are the axis names in OME-NGFF order (z, y, x), and axisOf maps
// each to ferry's axis index.
func ngffAxes(dim int) (names []string, axisOf []int) {
	if dim == 2 {
		return []string{"y", "x"}, []int{1, 0}
	}
	return []string{"z", "y", "x"}, []int{2, 1, 0}
}

type jsonObject = map[string]any

func spaceAxes(dim int) []jsonObject {
	names, _ := ngffAxes(dim)
	axes := make([]jsonObject, len(names))
	for i, n := range names {
		axes[i] = jsonObject{"name": n, "type": "space", "unit": "micrometer"}
	}
	return axes
}

// SceneMetadata is the root group's attributes: an OME-NGFF scene with the
// source and target coordinate systems and one `sequence` from source to
// target: the `displacements` of the field, then the `affine` part.
func (fd *Field) SceneMetadata() jsonObject {
	dim := fd.Grid.Dim
	_, axisOf := ngffAxes(dim)
	a, t := fd.Affine.Linear()
	affine := make([][]float64, dim)
	for i := range dim {
		row := make([]float64, dim+1)
		for j := range dim {
			row[j] = a[axisOf[i]][axisOf[j]]
		}
		row[dim] = t[axisOf[i]]
		affine[i] = row
	}
	return jsonObject{"ome": jsonObject{
		"version": NGFFVersion,
		"scene": jsonObject{
			"coordinateSystems": []jsonObject{
				{"name": SourceSystem, "axes": spaceAxes(dim)},
				{"name": TargetSystem, "axes": spaceAxes(dim)},
			},
			"coordinateTransformations": []jsonObject{{
				"type":   "sequence",
				"name":   "source to target",
				"input":  jsonObject{"name": SourceSystem},
				"output": jsonObject{"name": TargetSystem},
				"transformations": []jsonObject{
					{"type": "displacements", "path": DisplacementsPath, "interpolation": "linear"},
					{"type": "affine", "affine": affine},
				},
			}},
		},
	}}
}

// FieldMetadata is the displacement group's attributes: an OME-NGFF image
// whose one array holds the residual field on the grid, its first axis the
// displacement components (in the order of the space axes: z, y, x), its
// others the grid, placed in the source coordinate system by a scale and a
// translation.
func (fd *Field) FieldMetadata() jsonObject {
	g := fd.Grid
	names, axisOf := ngffAxes(g.Dim)
	axes := []jsonObject{{"name": "c", "type": "displacement", "discrete": true}}
	axes = append(axes, spaceAxes(g.Dim)...)
	scale := []float64{1}
	origin := []float64{0}
	for i := range names {
		scale = append(scale, g.Spacing[axisOf[i]])
		origin = append(origin, g.Origin[axisOf[i]])
	}
	return jsonObject{"ome": jsonObject{
		"version": NGFFVersion,
		"multiscales": []jsonObject{{
			"name":              "displacements",
			"coordinateSystems": []jsonObject{{"name": SourceSystem, "axes": axes}},
			"datasets": []jsonObject{{
				"path": ArrayPath,
				"coordinateTransformations": []jsonObject{{
					"type":   "sequence",
					"input":  jsonObject{"path": ArrayPath},
					"output": jsonObject{"name": SourceSystem},
					"transformations": []jsonObject{
						{"type": "scale", "scale": scale},
						{"type": "translation", "translation": origin},
					},
				}},
			}},
		}},
	}}
}

// ArrayShape is the shape of the stored array: components, then the grid
// in NGFF axis order.
func (fd *Field) ArrayShape() []int {
	g := fd.Grid
	_, axisOf := ngffAxes(g.Dim)
	shape := []int{g.Dim}
	for _, k := range axisOf {
		shape = append(shape, g.Size[k])
	}
	return shape
}

// chunkPlanes is how many planes (the slowest grid axis) go into a chunk.
const chunkPlanes = 8

// WriteZarr writes the field as a Zarr v3 store (Zarr specification
// version 3: zarr.json metadata documents, little-endian raw chunks, no
// compression) into dir, which must not exist yet; callers write into a
// temporary folder and rename it into place (see outfile).
func (fd *Field) WriteZarr(dir string) error {
	shape := fd.ArrayShape()
	chunk := append([]int(nil), shape...)
	chunk[1] = min(shape[1], chunkPlanes)
	names, _ := ngffAxes(fd.Grid.Dim)
	array := jsonObject{
		"zarr_format":        3,
		"node_type":          "array",
		"shape":              shape,
		"data_type":          "float32",
		"chunk_grid":         jsonObject{"name": "regular", "configuration": jsonObject{"chunk_shape": chunk}},
		"chunk_key_encoding": jsonObject{"name": "default", "configuration": jsonObject{"separator": "/"}},
		"fill_value":         0.0,
		"codecs":             []jsonObject{{"name": "bytes", "configuration": jsonObject{"endian": "little"}}},
		"dimension_names":    append([]string{"c"}, names...),
		"attributes":         jsonObject{},
	}
	group := func(attrs jsonObject) jsonObject {
		return jsonObject{"zarr_format": 3, "node_type": "group", "attributes": attrs}
	}
	docs := []struct {
		path string
		doc  jsonObject
	}{
		{"zarr.json", group(fd.SceneMetadata())},
		{"coordinateTransformations/zarr.json", group(jsonObject{})},
		{DisplacementsPath + "/zarr.json", group(fd.FieldMetadata())},
		{DisplacementsPath + "/" + ArrayPath + "/zarr.json", array},
	}
	if _, err := os.Stat(dir); err == nil {
		return fmt.Errorf("%s exists already", dir)
	}
	for _, d := range docs {
		data, err := json.MarshalIndent(d.doc, "", "  ")
		if err != nil {
			return err
		}
		if err := writeFile(filepath.Join(dir, d.path), append(data, '\n')); err != nil {
			return err
		}
	}
	return fd.writeChunks(filepath.Join(dir, DisplacementsPath, ArrayPath), shape, chunk)
}

// writeChunks writes the array's chunks, c/0/k/0/0 for the k-th block of
// planes; the last block is padded with the fill value, as regular chunk
// grids require.
func (fd *Field) writeChunks(dir string, shape, chunk []int) error {
	g := fd.Grid
	_, axisOf := ngffAxes(g.Dim)
	// inner is the number of samples in one plane of the slowest axis.
	inner := 1
	for _, n := range shape[2:] {
		inner *= n
	}
	slow := axisOf[0]
	blocks := (shape[1] + chunk[1] - 1) / chunk[1]
	buf := make([]byte, 4*g.Dim*chunk[1]*inner)
	for b := range blocks {
		clear(buf)
		for c := range g.Dim {
			comp := axisOf[c]
			for p := range chunk[1] {
				plane := b*chunk[1] + p
				if plane >= shape[1] {
					break
				}
				for s := range inner {
					// s runs over the faster grid axes in NGFF order: in
					// 3-D y then x, in 2-D x alone.
					var idx [3]int
					idx[slow] = plane
					if g.Dim == 3 {
						idx[1], idx[0] = s/g.Size[0], s%g.Size[0]
					} else {
						idx[0] = s
					}
					at := ((idx[2]*g.Size[1]+idx[1])*g.Size[0] + idx[0]) * g.Dim
					v := fd.Residual[at+comp]
					off := 4 * ((c*chunk[1]+p)*inner + s)
					binary.LittleEndian.PutUint32(buf[off:], math.Float32bits(v))
				}
			}
		}
		key := []string{"c", "0", strconv.Itoa(b)}
		for range shape[2:] {
			key = append(key, "0")
		}
		if err := writeFile(filepath.Join(append([]string{dir}, key...)...), buf); err != nil {
			return err
		}
	}
	return nil
}

func writeFile(path string, data []byte) error {
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	return os.WriteFile(path, data, 0o644)
}
