package landmarks

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"ferry/transform"
)

func TestCheckSpread(t *testing.T) {
	square := []transform.Vec{{0, 0, 0}, {100, 0, 0}, {0, 100, 0}, {100, 100, 0}}
	tetra := []transform.Vec{{0, 0, 0}, {100, 0, 0}, {0, 100, 0}, {0, 0, 100}}
	line := []transform.Vec{{0, 0, 0}, {10, 10, 10}, {20, 20, 20}, {35, 35, 35}}
	// A tilted plane far from the origin, where centring matters.
	var tilted []transform.Vec
	for i := range 5 {
		for j := range 5 {
			x, y := 1e5+37*float64(i), -2e5+53*float64(j)
			tilted = append(tilted, transform.Vec{x, y, 3e4 + 0.3*x - 0.7*y})
		}
	}
	// Landmarks in a slab 2 µm deep and 400 µm wide: thin, but spread in
	// three dimensions.
	rng := rand.New(rand.NewPCG(1, 2))
	var slab, flat []transform.Vec
	for range 30 {
		x, y := 400*rng.Float64(), 400*rng.Float64()
		slab = append(slab, transform.Vec{x, y, 50 + 2*rng.Float64()})
		flat = append(flat, transform.Vec{x, y, 50 + 1e-5*rng.Float64()})
	}
	same := []transform.Vec{{0.1, 0.2, 0.3}, {0.1, 0.2, 0.3}, {0.1, 0.2, 0.3}}

	tests := []struct {
		name      string
		points    []transform.Vec
		dim, need int
		err       string // exact message, or a prefix ending in "..."
	}{
		{name: "tetrahedron", points: tetra, dim: 3, need: 3},
		{name: "square in 3-D", points: square, dim: 3, need: 3,
			err: "the 4 landmarks lie on a plane (less than 0.001 µm RMS distance from it, against 50 µm RMS across it): the model needs them spread in depth too; add landmarks above or below that plane"},
		{name: "square for a model that needs a plane", points: square, dim: 3, need: 2},
		{name: "square in 2-D", points: square, dim: 2, need: 2},
		{name: "line for a plane", points: line, dim: 3, need: 2,
			err: "the 4 landmarks lie on a straight line (..."},
		{name: "line for depth", points: line, dim: 3, need: 3,
			err: "the 4 landmarks lie on a straight line (..."},
		{name: "line for a translation-like need", points: line, dim: 3, need: 1},
		{name: "line in 2-D", points: []transform.Vec{{0, 1, 0}, {2, 5, 0}, {4, 9, 0}}, dim: 2, need: 2,
			err: "the 3 landmarks lie on a straight line (..."},
		{name: "tilted plane far from the origin", points: tilted, dim: 3, need: 3,
			err: "the 25 landmarks lie on a plane (..."},
		{name: "tilted plane for a model that needs a plane", points: tilted, dim: 3, need: 2},
		{name: "thin slab", points: slab, dim: 3, need: 3},
		{name: "flat to 10 pm across 400 µm", points: flat, dim: 3, need: 3,
			err: "the 30 landmarks lie on a plane (..."},
		{name: "one position", points: same, dim: 3, need: 1,
			err: "all 3 landmarks are at the same position: a model needs them spread out"},
		{name: "one position for a plane", points: same, dim: 3, need: 2,
			err: "all 3 landmarks are at the same position: a model needs them spread out"},
		{name: "too few for depth", points: tetra[:3], dim: 3, need: 3,
			err: "need at least 4 landmarks not on one plane, have 3"},
		{name: "too few for a plane", points: tetra[:2], dim: 3, need: 2,
			err: "need at least 3 landmarks not on one line, have 2"},
		{name: "too few to differ", points: tetra[:1], dim: 3, need: 1,
			err: "need at least 2 landmarks at different positions, have 1"},
		{name: "no need", points: nil, dim: 3, need: 0},
		{name: "not finite", points: []transform.Vec{{0, 0, 0}, {1, math.NaN(), 0}, {2, 0, 0}}, dim: 2, need: 1,
			err: "landmark 2 has a coordinate that is not a finite number"},
		{name: "need beyond dim", points: tetra, dim: 2, need: 3, err: "cannot ask 2-D landmarks to spread in 3 dimensions"},
		{name: "bad dim", points: tetra, dim: 1, need: 1, err: "dimension 1: want 2 or 3"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := CheckSpread(tt.points, tt.dim, tt.need)
			if tt.err == "" {
				if err != nil {
					t.Fatalf("unexpected error: %v", err)
				}
				return
			}
			if err == nil {
				t.Fatalf("no error, want %s", tt.err)
			}
			got := err.Error()
			if prefix, ok := strings.CutSuffix(tt.err, "..."); ok {
				if !strings.HasPrefix(got, prefix) {
					t.Errorf("error\n got %s\nwant %s", got, tt.err)
				}
			} else if got != tt.err {
				t.Errorf("error\n got %s\nwant %s", got, tt.err)
			}
		})
	}
}
