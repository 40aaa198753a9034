package refine

import (
	"context"
	"encoding/csv"
	"io"
	"strconv"

	"ferry/register"
	"ferry/transform"
)

// WritePairsTable writes the pairs file to path with its sidecar (see
// register.WriteTable), whole or not at all: the table of WritePairs,
// header row first, and prov with the frame and units of its source_* and
// target_* columns beside it.
func WritePairsTable(ctx context.Context, path string, prov register.Provenance, rec Record, dim int, vox register.Voxels) error {
	axes := []string{"x", "y", "z"}[:dim]
	var coords []register.Coordinates
	for _, side := range []struct {
		prefix, frame string
		vox           *transform.Vec
	}{{"source_", register.FrameSource, vox.Source}, {"target_", register.FrameTarget, vox.Target}} {
		cols := make([]string, dim)
		for k, a := range axes {
			cols[k] = side.prefix + a
		}
		coords = append(coords, register.CoordinatesIn(cols, side.frame, side.vox))
	}
	return register.WriteTable(ctx, path, prov, coords, func(w io.Writer) error {
		return WritePairs(w, rec, dim, vox)
	})
}

// WritePairs writes the correspondences relied on in the landmark-pairs
// format, kind soma, so that a user can inspect them or add confirmed ones
// to the landmark file: id, kind, source_x … target_z (in voxels of each
// side when vox gives their sizes, as the landmark file was), then cell,
// candidate, p_match, node (whether the pair is a node of the spline),
// loo_error_um and r95_um.
func WritePairs(w io.Writer, rec Record, dim int, vox register.Voxels) error {
	axes := []string{"x", "y", "z"}[:dim]
	header := []string{"id", "kind"}
	for _, side := range []string{"source_", "target_"} {
		for _, a := range axes {
			header = append(header, side+a)
		}
	}
	header = append(header, "cell", "candidate", "p_match", "node", "loo_error_um", "r95_um")
	cw := csv.NewWriter(w)
	if err := cw.Write(header); err != nil {
		return err
	}
	num := func(x float64) string { return strconv.FormatFloat(x, 'f', 4, 64) }
	for _, p := range rec.Pairs {
		row := []string{"soma:" + p.Cell, "soma"}
		for _, side := range []struct {
			pos transform.Vec
			vox *transform.Vec
		}{{p.Source, vox.Source}, {p.Target, vox.Target}} {
			for k := range dim {
				v := side.pos[k]
				if side.vox != nil {
					v /= side.vox[k]
				}
				row = append(row, num(v))
			}
		}
		row = append(row, p.Cell, p.Candidate, strconv.FormatFloat(p.P, 'f', 6, 64),
			strconv.FormatBool(p.Node), num(p.LOOError), num(p.R95))
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}
