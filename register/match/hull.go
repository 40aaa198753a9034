package match

import (
	"math"

	"ferry/register/internal/hull"
	"ferry/transform"
)

// volume is the candidates' convex hull, grown outward by a margin, as
// support planes (package hull, the same approximation as the landmarks'
// hull of package register). It stands for the volume in which candidates
// were looked for.
//
// The margin is half the candidates' typical nearest-neighbour spacing: the
// outermost candidates lie, on average, that far inside the edge of the
// volume that was searched.
type volume struct{ hull.Planes }

func newVolume(pos []transform.Vec, dim int, margin float64) volume {
	return volume{hull.NewPlanes(pos, dim, margin)}
}

// depth is the signed distance (µm) from x to the edge of the volume,
// positive inside, and the outward normal of the face that sets it.
func (v volume) depth(x transform.Vec) (float64, transform.Vec) { return v.Depth(x) }

// ballShare is the share of a ball (disc in 2-D) of radius r whose centre
// lies at signed depth h inside a half-space: the edge correction of a
// density counted in that ball.
func ballShare(dim int, r, h float64) float64 {
	switch {
	case r <= 0 || h >= r:
		return 1
	case h <= -r:
		return 0
	}
	if dim == 2 {
		// The circular segment beyond the edge.
		seg := r*r*math.Acos(h/r) - h*math.Sqrt(r*r-h*h)
		return 1 - seg/(math.Pi*r*r)
	}
	// The spherical cap of height a beyond the edge, π a² (3r − a)/3.
	a := r - h
	return 1 - (a*a*(3*r-a)/4)/(r*r*r)
}

// ballVolume is the volume (µm³) of a ball of radius r, or the area (µm²) of
// a disc in 2-D.
func ballVolume(dim int, r float64) float64 {
	if dim == 2 {
		return math.Pi * r * r
	}
	return 4 * math.Pi * r * r * r / 3
}

func sqrt(x float64) float64 { return math.Sqrt(math.Max(x, 0)) }
