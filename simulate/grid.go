package simulate

import (
	"math"

	"ferry/transform"
)

// pointGrid is the accelerator of dart throwing: a uniform grid of cells of
// side cell over a box, each cell listing the points that fall in it, so
// that "is any point within r ≤ cell of p" looks at 27 cells only.
type pointGrid struct {
	cell   float64
	origin transform.Vec
	n      [3]int
	cells  [][]int32
	points []transform.Vec
}

func newPointGrid(lo, hi transform.Vec, cell float64) *pointGrid {
	g := &pointGrid{cell: cell, origin: lo}
	total := 1
	for i := range 3 {
		g.n[i] = max(1, int(math.Ceil((hi[i]-lo[i])/cell)))
		total *= g.n[i]
	}
	g.cells = make([][]int32, total)
	return g
}

func (g *pointGrid) index(p transform.Vec) [3]int {
	var c [3]int
	for i := range 3 {
		c[i] = min(max(int(math.Floor((p[i]-g.origin[i])/g.cell)), 0), g.n[i]-1)
	}
	return c
}

func (g *pointGrid) add(p transform.Vec) {
	c := g.index(p)
	k := (c[2]*g.n[1]+c[1])*g.n[0] + c[0]
	g.cells[k] = append(g.cells[k], int32(len(g.points)))
	g.points = append(g.points, p)
}

// near reports whether a stored point lies closer than r to p; r must not
// exceed the cell side.
func (g *pointGrid) near(p transform.Vec, r float64) bool {
	c := g.index(p)
	r2 := r * r
	for z := max(c[2]-1, 0); z <= min(c[2]+1, g.n[2]-1); z++ {
		for y := max(c[1]-1, 0); y <= min(c[1]+1, g.n[1]-1); y++ {
			for x := max(c[0]-1, 0); x <= min(c[0]+1, g.n[0]-1); x++ {
				for _, i := range g.cells[(z*g.n[1]+y)*g.n[0]+x] {
					d := g.points[i].Sub(p)
					if d.Dot(d) < r2 {
						return true
					}
				}
			}
		}
	}
	return false
}

// segmentGrid answers "does p lie within a clearance of any vessel wall",
// listing in each cell the segments whose bounding box, padded by the
// largest clearance asked for, touches it.
type segmentGrid struct {
	cell     float64
	origin   transform.Vec
	n        [3]int
	cells    [][]int32
	segments []Segment
}

func newSegmentGrid(lo, hi transform.Vec, cell float64, segments []Segment, clearance float64) *segmentGrid {
	g := &segmentGrid{cell: cell, origin: lo, segments: segments}
	total := 1
	for i := range 3 {
		g.n[i] = max(1, int(math.Ceil((hi[i]-lo[i])/cell)))
		total *= g.n[i]
	}
	g.cells = make([][]int32, total)
	for si, s := range segments {
		pad := s.RadiusUM + clearance
		var a, b [3]int
		for i := range 3 {
			lo := math.Min(s.Start[i], s.End[i]) - pad
			hi := math.Max(s.Start[i], s.End[i]) + pad
			a[i] = min(max(int(math.Floor((lo-g.origin[i])/cell)), 0), g.n[i]-1)
			b[i] = min(max(int(math.Floor((hi-g.origin[i])/cell)), 0), g.n[i]-1)
		}
		for z := a[2]; z <= b[2]; z++ {
			for y := a[1]; y <= b[1]; y++ {
				for x := a[0]; x <= b[0]; x++ {
					k := (z*g.n[1]+y)*g.n[0] + x
					g.cells[k] = append(g.cells[k], int32(si))
				}
			}
		}
	}
	return g
}

// blocked reports whether p lies closer than radius + clearance to the axis
// of a segment; clearance must not exceed the one the grid was built with.
func (g *segmentGrid) blocked(p transform.Vec, clearance float64) bool {
	var c [3]int
	for i := range 3 {
		c[i] = min(max(int(math.Floor((p[i]-g.origin[i])/g.cell)), 0), g.n[i]-1)
	}
	for _, si := range g.cells[(c[2]*g.n[1]+c[1])*g.n[0]+c[0]] {
		s := g.segments[si]
		r := s.RadiusUM + clearance
		if distanceToSegment(p, s.Start, s.End) < r {
			return true
		}
	}
	return false
}

// distanceToSegment is the distance from p to the segment a–b.
func distanceToSegment(p, a, b transform.Vec) float64 {
	ab := b.Sub(a)
	t := 0.0
	if l2 := ab.Dot(ab); l2 > 0 {
		t = math.Min(math.Max(p.Sub(a).Dot(ab)/l2, 0), 1)
	}
	return p.Sub(a.Add(ab.Scale(t))).Norm()
}
