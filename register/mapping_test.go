package register

import (
	"context"
	"math/rand/v2"
	"testing"

	"ferry/simulate"
	"ferry/transform"
)

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
