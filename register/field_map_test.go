package register

import (
	"math"
	"math/rand/v2"
	"sort"
	"testing"

	"ferry/register/internal/families"
	"ferry/transform"
)

// The variances map interpolates on a grid for many cells stay close to the
// exact ones: the radius (square root) within 10 % for 95 % of the cells,
// and the median within 3 %.
func TestFieldGridVariances(t *testing.T) {
	s := families.Draw(families.Mistakes()[6], 1)
	p := familyProblem(s, func(i int) bool { return !s.Wrong[i] })
	m, a := mapperFor(t, p, Settings{Smoothing: Smoothing{Auto: true}})
	if m.field == nil {
		t.Fatalf("no error model for %d landmarks, model %s", p.Len(), a.Chosen)
	}
	rng := rand.New(rand.NewPCG(5, 5))
	xs := make([]transform.Vec, 2*fieldGridNodes)
	for i := range xs {
		xs[i] = transform.Vec{-40 + rng.Float64()*580, -40 + rng.Float64()*580, -20 + rng.Float64()*390}
	}
	grid := m.field.variances(xs, true)
	exact := m.field.variances(xs[:2000], false)
	var rel []float64
	for i, e := range exact {
		for k := range 3 {
			rel = append(rel, math.Abs(math.Sqrt(grid[i][k]/e[k])-1))
		}
	}
	sort.Float64s(rel)
	med, p95 := rel[len(rel)/2], rel[int(0.95*float64(len(rel)))]
	t.Logf("sd of the grid against the exact: median %.3f, 95th percentile %.3f relative error", med, p95)
	if med > 0.03 || p95 > 0.10 {
		t.Errorf("grid variances off by a median %.3f and a 95th percentile %.3f of the sd", med, p95)
	}
}

// The grid's nodes are computed as cells first need them; a cell's
// variance is the same bits whichever cells were mapped before it, in
// whichever blocks, and equals the grid computed whole.
func TestFieldGridLazyNodes(t *testing.T) {
	s := families.Draw(families.Mistakes()[6], 1)
	p := familyProblem(s, func(i int) bool { return !s.Wrong[i] })
	m, a := mapperFor(t, p, Settings{Smoothing: Smoothing{Auto: true}})
	if m.field == nil {
		t.Fatalf("no error model for %d landmarks, model %s", p.Len(), a.Chosen)
	}
	rng := rand.New(rand.NewPCG(7, 7))
	xs := make([]transform.Vec, 3000)
	for i := range xs {
		xs[i] = transform.Vec{-40 + rng.Float64()*580, -40 + rng.Float64()*580, -20 + rng.Float64()*390}
	}
	// In three blocks, the last first.
	blocks := make([]transform.Vec, 0, len(xs))
	blocks = append(blocks, m.field.variances(xs[2000:], true)...)
	head := m.field.variances(xs[:1000], true)
	mid := m.field.variances(xs[1000:2000], true)
	got := append(append(head, mid...), blocks...)
	g := m.field.grid()
	computed := 0
	for _, k := range g.known {
		if k {
			computed++
		}
	}
	// The whole grid, every node computed at once, interpolated as before.
	all := m.field.exactVariances(g.nodes)
	for i, x := range xs {
		want := m.field.exactVariances([]transform.Vec{x})[0]
		if g.inside(x, 3) {
			c := g.corners(x, 3)
			want = transform.Vec{}
			for q, node := range c.node {
				if c.w[q] != 0 {
					want = want.Add(all[node].Scale(c.w[q]))
				}
			}
		}
		if !m.field.hull.Contains(x) {
			for k := range 3 {
				want[k] *= m.field.params.outsideScale(k)
			}
		}
		if got[i] != want {
			t.Fatalf("point %d at %v: variance %v in blocks, %v from the whole grid", i, x, got[i], want)
		}
	}
	t.Logf("%d of %d grid nodes computed for %d points", computed, len(g.nodes), len(xs))
}
