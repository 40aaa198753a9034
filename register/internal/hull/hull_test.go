package hull

import (
	"math"
	"math/rand/v2"
	"testing"

	"ferry/transform"
)

// The classified grid of the hull gives the same answer as testing every
// support plane, inside, outside and at the edges, in 3-D and 2-D.
func TestHullGrid(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	for _, dim := range []int{2, 3} {
		var pts []transform.Vec
		for range 60 {
			p := transform.Vec{rng.Float64() * 400, rng.Float64() * 300, rng.Float64() * 200}
			if dim == 2 {
				p[2] = 0
			}
			pts = append(pts, p)
		}
		h := New(pts, dim)
		plain := func(x transform.Vec) bool {
			for k, d := range h.Dirs {
				if d.Dot(x) > h.Reach[k]+h.tol {
					return false
				}
			}
			return true
		}
		in := 0
		for range 20000 {
			x := transform.Vec{-50 + rng.Float64()*500, -50 + rng.Float64()*400, -50 + rng.Float64()*300}
			if dim == 2 {
				x[2] = 0
			}
			if got, want := h.Contains(x), plain(x); got != want {
				t.Fatalf("%d-D: contains(%v) = %v, plane by plane %v", dim, x, got, want)
			}
			if plain(x) {
				in++
			}
		}
		for _, p := range pts {
			if !h.Contains(p) {
				t.Fatalf("%d-D: landmark %v outside its own hull", dim, p)
			}
		}
		if in == 0 {
			t.Fatalf("%d-D: no test point inside", dim)
		}
	}
}

// A block of landmarks cut along tilted axes: the middle of each face is
// the hull's edge to within a micrometre, not the few micrometres a plane a
// few degrees off the face would allow.
func TestHullTiltedBlock(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 1))
	rot := randomRotation(rng)
	var pts []transform.Vec
	for i := range 2 {
		for j := range 2 {
			for k := range 2 {
				pts = append(pts, rot.MulVec(transform.Vec{float64(i) * 500, float64(j) * 400, float64(k) * 300}))
			}
		}
	}
	h := New(pts, 3)
	for _, tc := range []struct {
		local transform.Vec
		want  bool
	}{
		{transform.Vec{250, 200, 299}, true},
		{transform.Vec{250, 200, 301}, false},
		{transform.Vec{501, 200, 150}, false},
		{transform.Vec{499, 200, 150}, true},
		{transform.Vec{250, -1, 150}, false},
	} {
		if got := h.Contains(rot.MulVec(tc.local)); got != tc.want {
			t.Errorf("point %v of the block: inside %v, want %v", tc.local, got, tc.want)
		}
	}
}

// A block of points cut square to the coordinate axes, grown by a margin:
// the depth of a point is its distance to the nearest face, less than zero
// outside, and the margin moves every face out by as much.
func TestPlanesDepthBox(t *testing.T) {
	var pts []transform.Vec
	for i := range 2 {
		for j := range 2 {
			for k := range 2 {
				pts = append(pts, transform.Vec{float64(i) * 500, float64(j) * 400, float64(k) * 300})
			}
		}
	}
	for _, margin := range []float64{0, 5} {
		p := NewPlanes(pts, 3, margin)
		for _, tc := range []struct {
			at     transform.Vec
			depth  float64
			normal transform.Vec
		}{
			{transform.Vec{250, 200, 290}, 10, transform.Vec{0, 0, 1}},
			{transform.Vec{250, 200, 320}, -20, transform.Vec{0, 0, 1}},
			{transform.Vec{3, 200, 150}, 3, transform.Vec{-1, 0, 0}},
		} {
			got, normal := p.Depth(tc.at)
			if math.Abs(got-(tc.depth+margin)) > 1e-9 || normal.Sub(tc.normal).Norm() > 1e-9 {
				t.Errorf("margin %g: depth(%v) = %g along %v, want %g along %v", margin, tc.at, got, normal, tc.depth+margin, tc.normal)
			}
		}
	}
}

// randomRotation draws a uniform rotation from a uniform unit quaternion.
func randomRotation(rng *rand.Rand) transform.Mat {
	q := [4]float64{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
	n := math.Sqrt(q[0]*q[0] + q[1]*q[1] + q[2]*q[2] + q[3]*q[3])
	w, x, y, z := q[0]/n, q[1]/n, q[2]/n, q[3]/n
	return transform.Mat{
		{1 - 2*(y*y+z*z), 2 * (x*y - w*z), 2 * (x*z + w*y)},
		{2 * (x*y + w*z), 1 - 2*(x*x+z*z), 2 * (y*z - w*x)},
		{2 * (x*z - w*y), 2 * (y*z + w*x), 1 - 2*(x*x+y*y)},
	}
}
