package hull

import (
	"math"

	"ferry/internal/parallel"
	"ferry/transform"
)

// Hull is a cloud's support-plane hull (Planes, no margin) that answers
// "inside?" for many points quickly.
//
// Testing every plane for every point would cost more than the rest of
// mapping, so the cloud's bounding box is cut into a grid of boxes
// classified once: a box whose corners are all inside lies inside (the
// polytope is convex), a box whose corners are all beyond one plane lies
// outside, and only points in the boxes between are tested plane by plane.
type Hull struct {
	Planes
	tol float64
	// The classification grid: box (i, j, k) spans lo + (i, j, k)·step to
	// one step more; class is +1 inside, −1 outside, 0 mixed.
	lo, step transform.Vec
	n        [3]int
	class    []int8
}

// gridBoxes is the number of classification boxes along each axis.
const gridBoxes = 16

// New is the hull of points (not empty) in dim (2 or 3) dimensions.
func New(points []transform.Vec, dim int) *Hull {
	h := &Hull{Planes: NewPlanes(points, dim, 0)}
	h.tol = h.Tolerance()
	h.classify(points)
	return h
}

// classify fills the grid of boxes over the points' bounding box.
func (h *Hull) classify(points []transform.Vec) {
	hi := points[0]
	h.lo = points[0]
	for _, p := range points {
		for k := range h.Dim {
			h.lo[k] = math.Min(h.lo[k], p[k])
			hi[k] = math.Max(hi[k], p[k])
		}
	}
	h.n = [3]int{1, 1, 1}
	for k := range h.Dim {
		h.n[k] = gridBoxes
		h.step[k] = (hi[k] - h.lo[k]) / gridBoxes
		if !(h.step[k] > 0) {
			// Flat along this axis: one box, and every point tested.
			h.n[k], h.step[k] = 1, 0
		}
	}
	// Which planes each grid corner lies beyond.
	nc := [3]int{h.n[0] + 1, h.n[1] + 1, h.n[2] + 1}
	if h.Dim == 2 {
		nc[2] = 1
	}
	corner := func(i, j, k int) transform.Vec {
		return transform.Vec{h.lo[0] + float64(i)*h.step[0], h.lo[1] + float64(j)*h.step[1], h.lo[2] + float64(k)*h.step[2]}
	}
	words := (len(h.Dirs) + 63) / 64
	beyond := make([]uint64, nc[0]*nc[1]*nc[2]*words)
	inside := make([]bool, nc[0]*nc[1]*nc[2])
	// Corners are independent: classify the layers of them on all cores,
	// each against the planes in struct-of-arrays form.
	dx, dy, dz := make([]float64, len(h.Dirs)), make([]float64, len(h.Dirs)), make([]float64, len(h.Dirs))
	for d, dir := range h.Dirs {
		dx[d], dy[d], dz[d] = dir[0], dir[1], dir[2]
	}
	parallel.Ranges(nc[2]*nc[1], 1, func(lo, hi int) {
		for row := lo; row < hi; row++ {
			k, j := row/nc[1], row%nc[1]
			for i := range nc[0] {
				c := (k*nc[1]+j)*nc[0] + i
				x := corner(i, j, k)
				inside[c] = true
				for d := range dx {
					if dx[d]*x[0]+dy[d]*x[1]+dz[d]*x[2] > h.Reach[d]+h.tol {
						beyond[c*words+d/64] |= 1 << (d % 64)
						inside[c] = false
					}
				}
			}
		}
	})
	h.class = make([]int8, h.n[0]*h.n[1]*h.n[2])
	for k := range h.n[2] {
		for j := range h.n[1] {
			for i := range h.n[0] {
				allIn := true
				common := make([]uint64, words)
				for w := range common {
					common[w] = ^uint64(0)
				}
				for dk := range 2 {
					if h.Dim == 2 && dk == 1 {
						break
					}
					for dj := range 2 {
						for di := range 2 {
							c := ((k+dk)*nc[1]+j+dj)*nc[0] + i + di
							allIn = allIn && inside[c]
							for w := range common {
								common[w] &= beyond[c*words+w]
							}
						}
					}
				}
				out := false
				for _, w := range common {
					out = out || w != 0
				}
				b := (k*h.n[1]+j)*h.n[0] + i
				switch {
				case allIn && h.step[0] > 0 && h.step[1] > 0 && (h.Dim == 2 || h.step[2] > 0):
					h.class[b] = 1
				case out:
					h.class[b] = -1
				}
			}
		}
	}
}

// Boxes is the number of classification boxes; they are numbered from 0.
func (h *Hull) Boxes() int { return len(h.class) }

// Box is the index of the classification box that holds x, or −1 when x
// lies outside the bounding box (beyond a rounding margin).
func (h *Hull) Box(x transform.Vec) int {
	var idx [3]int
	for k := range h.Dim {
		if h.step[k] == 0 {
			continue
		}
		f := (x[k] - h.lo[k]) / h.step[k]
		if f < -1e-6 || f > float64(h.n[k])+1e-6 {
			return -1
		}
		idx[k] = min(max(int(f), 0), h.n[k]-1)
	}
	return (idx[2]*h.n[1]+idx[1])*h.n[0] + idx[0]
}

// BoxCentre is the centre of box b, and HalfDiagonal half the length of a
// box's diagonal (µm): every point of box b lies within HalfDiagonal of
// BoxCentre(b), which lets a caller classify whole boxes by their centre.
func (h *Hull) BoxCentre(b int) transform.Vec {
	i, j, k := b%h.n[0], (b/h.n[0])%h.n[1], b/(h.n[0]*h.n[1])
	c := transform.Vec{
		h.lo[0] + (float64(i)+0.5)*h.step[0],
		h.lo[1] + (float64(j)+0.5)*h.step[1],
		h.lo[2] + (float64(k)+0.5)*h.step[2],
	}
	if h.Dim == 2 {
		c[2] = 0
	}
	return c
}

// HalfDiagonal: see BoxCentre.
func (h *Hull) HalfDiagonal() float64 {
	return 0.5 * math.Sqrt(h.step[0]*h.step[0]+h.step[1]*h.step[1]+h.step[2]*h.step[2])
}

// Contains reports whether x lies inside the hull, up to a rounding
// tolerance of 10⁻⁹ of the cloud's extent.
func (h *Hull) Contains(x transform.Vec) bool {
	b := h.Box(x)
	if b < 0 {
		// Outside the bounding box, hence outside the hull, up to the
		// tolerance the planes allow.
		return false
	}
	switch h.class[b] {
	case 1:
		return true
	case -1:
		return false
	}
	for k, d := range h.Dirs {
		if d[0]*x[0]+d[1]*x[1]+d[2]*x[2] > h.Reach[k]+h.tol {
			return false
		}
	}
	return true
}
