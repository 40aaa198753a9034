package imaging

import (
	"math"

	"ferry/status"
	"ferry/transform"
)

// PlaneMarks returns the marks of the points (µm, in the plane's space)
// whose sphere of radius reach[i] (µm; their r95) meets the plane of grid,
// or that lie within one page of it, in the plane's pixels. ids, when not
// nil, name the points; the marks carry them.
func PlaneMarks(pos []transform.Vec, reach []float64, status []status.Status, ids []string, grid Grid) []Mark {
	z := grid.Origin[2] + float64(grid.Z)*grid.Voxel[2]
	var marks []Mark
	for i, p := range pos {
		if math.Abs(p[2]-z) > math.Max(reach[i], grid.Voxel[2]) {
			continue
		}
		m := Mark{X: (p[0] - grid.Origin[0]) / grid.Voxel[0], Y: (p[1] - grid.Origin[1]) / grid.Voxel[1], Status: status[i]}
		if ids != nil {
			m.ID = ids[i]
		}
		marks = append(marks, m)
	}
	return marks
}
