package register

import (
	"context"
	"math/rand/v2"
	"testing"

	"ferry/register/simulate"
	"ferry/transform"
)

// The classified grid of the hull gives the same answer as testing every
// support plane, inside, outside and at the edges, in 3-D and 2-D.
func TestSupportHullGrid(t *testing.T) {
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
		h := newSupportHull(pts, dim)
		plain := func(x transform.Vec) bool {
			for k, d := range h.dirs {
				if d.Dot(x) > h.reach[k]+h.tol {
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
			if got, want := h.contains(x), plain(x); got != want {
				t.Fatalf("%d-D: contains(%v) = %v, plane by plane %v", dim, x, got, want)
			}
			if plain(x) {
				in++
			}
		}
		for _, p := range pts {
			if !h.contains(p) {
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
func TestSupportHullTiltedBlock(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 1))
	rot := randomRotation(rng, 3)
	var pts []transform.Vec
	for i := range 2 {
		for j := range 2 {
			for k := range 2 {
				pts = append(pts, rot.MulVec(transform.Vec{float64(i) * 500, float64(j) * 400, float64(k) * 300}))
			}
		}
	}
	h := newSupportHull(pts, 3)
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
		if got := h.contains(rot.MulVec(tc.local)); got != tc.want {
			t.Errorf("point %v of the block: inside %v, want %v", tc.local, got, tc.want)
		}
	}
}

// The boxes' verdicts on isolation agree with asking the tree at every
// point.
func TestIsolatedGrid(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 7))
	p := synthetic(rng, 30, affineTruth, transform.Vec{0.5, 0.5, 1})
	m, _ := mapperFor(t, p, Settings{Model: transform.Affine})
	reach := isolatedSpacings * m.u.Spacing
	for range 20000 {
		x := transform.Vec{rng.Float64() * 500, rng.Float64() * 500, rng.Float64() * 300}
		if got, want := m.isolated(x), m.nearestLandmark(x) > reach; got != want {
			t.Fatalf("isolated(%v) = %v, the tree says %v", x, got, want)
		}
	}
}

// TestMapAllContext: the blocks give the same results as one MapAll, and a
// cancelled context stops the mapping.
func TestMapAllContext(t *testing.T) {
	m, xs := contextFixture(t)
	want := m.MapAll(xs, nil, false)
	got, err := m.MapAllContext(context.Background(), xs, nil, false)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != len(want) {
		t.Fatalf("%d results for %d points", len(got), len(want))
	}
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("point %d: %v in blocks, %v at once", i, got[i], want[i])
		}
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := m.MapAllContext(ctx, xs, nil, false); err == nil {
		t.Error("a cancelled context mapped")
	}
}

// contextFixture is a spline mapper of a small simulated scenario and more
// than two blocks of points to map.
func contextFixture(t *testing.T) (*Mapper, []transform.Vec) {
	t.Helper()
	s, err := simulate.Generate(simulate.SmallParams(), 3)
	if err != nil {
		t.Fatal(err)
	}
	m, _ := mapperFor(t, scenarioProblem(s, false), Settings{Model: transform.TPS, Smoothing: Smoothing{Value: 1}})
	rng := rand.New(rand.NewPCG(5, 5))
	xs := make([]transform.Vec, 2*mapBlock+17)
	for i := range xs {
		xs[i] = transform.Vec{rng.Float64() * 400, rng.Float64() * 400, rng.Float64() * 300}
	}
	return m, xs
}
