package match

import (
	"math"
	"math/rand/v2"
	"testing"

	"ferry/transform"
)

// TestBallShare checks the edge correction against counting random points
// of the ball (disc) on the inner side of a plane at depth h.
func TestBallShare(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for _, dim := range []int{2, 3} {
		for _, h := range []float64{-1.5, -1, -0.6, -0.2, 0, 0.3, 0.7, 1, 2} {
			const n = 200000
			inside, total := 0, 0
			for total < n {
				var p transform.Vec
				for k := range dim {
					p[k] = 2*rng.Float64() - 1
				}
				if p.Norm() > 1 {
					continue
				}
				total++
				// The plane is x = h, the inside x < h... seen from the
				// centre at depth h below it.
				if p[0] < h {
					inside++
				}
			}
			want := float64(inside) / n
			if got := ballShare(dim, 1, h); math.Abs(got-want) > 0.005 {
				t.Errorf("%d-D, depth %v: share %.4f, counted %.4f", dim, h, got, want)
			}
		}
	}
}

func TestVolumeDepth(t *testing.T) {
	// Candidates at the corners and centre of a 100 µm cube, no margin.
	var pos []transform.Vec
	for _, x := range []float64{0, 100} {
		for _, y := range []float64{0, 100} {
			for _, z := range []float64{0, 100} {
				pos = append(pos, transform.Vec{x, y, z})
			}
		}
	}
	pos = append(pos, transform.Vec{50, 50, 50})
	v := newVolume(pos, 3, 0)
	for _, tc := range []struct {
		at   transform.Vec
		want float64
		tol  float64
	}{
		{transform.Vec{50, 50, 50}, 50, 0.5},
		{transform.Vec{50, 50, 90}, 10, 0.5},
		{transform.Vec{10, 50, 50}, 10, 0.5},
		// Outside, the depth is minus the largest overshoot of a support
		// plane, at most the true distance and close to it off the edges.
		{transform.Vec{50, 50, 130}, -30, 0.5},
		{transform.Vec{-20, 50, 50}, -20, 0.5},
	} {
		got, normal := v.depth(tc.at)
		if math.Abs(got-tc.want) > tc.tol {
			t.Errorf("depth at %v: %.3f µm, want %.1f", tc.at, got, tc.want)
		}
		if math.Abs(normal.Norm()-1) > 1e-12 {
			t.Errorf("normal at %v is not a unit vector: %v", tc.at, normal)
		}
	}
	// With a margin, every depth grows by it.
	grown := newVolume(pos, 3, 5)
	if a, b := v.depth(transform.Vec{50, 50, 90}); true {
		c, _ := grown.depth(transform.Vec{50, 50, 90})
		if math.Abs(c-a-5) > 1e-9 {
			t.Errorf("depth with a 5 µm margin %.3f, without %.3f (normal %v)", c, a, b)
		}
	}
}

func TestChiSquareQuantile(t *testing.T) {
	// Reference values from scipy.stats.chi2.ppf.
	for _, tc := range []struct {
		k    int
		p    float64
		want float64
	}{
		{2, 0.9999, 18.420680743952584},
		{3, 0.9999, 21.107513466160444},
		{3, 0.95, 7.814727903251179},
	} {
		if got := chiSquareQuantile(tc.k, tc.p); math.Abs(got-tc.want) > 1e-9 {
			t.Errorf("χ²_%d(%v) = %v, want %v", tc.k, tc.p, got, tc.want)
		}
	}
}

// TestVolumeDepthRotatedBlock: the faces of a block cut square to its own
// axes, turned 30° about z, are found through the candidates' principal
// axes.
func TestVolumeDepthRotatedBlock(t *testing.T) {
	c, s := math.Cos(math.Pi/6), math.Sin(math.Pi/6)
	rot := func(p transform.Vec) transform.Vec {
		return transform.Vec{c*p[0] - s*p[1], s*p[0] + c*p[1], p[2]}
	}
	var pos []transform.Vec
	for i := 0; i <= 40; i++ {
		for j := 0; j <= 20; j++ {
			for k := 0; k <= 10; k++ {
				pos = append(pos, rot(transform.Vec{5 * float64(i), 5 * float64(j), 5 * float64(k)}))
			}
		}
	}
	v := newVolume(pos, 3, 0)
	for _, tc := range []struct {
		at   transform.Vec // in the block's own axes
		want float64
	}{
		{transform.Vec{100, 50, 40}, 10},   // below the top face
		{transform.Vec{100, 90, 25}, 10},   // inside the long side face
		{transform.Vec{100, 112, 25}, -12}, // outside it
	} {
		if got, _ := v.depth(rot(tc.at)); math.Abs(got-tc.want) > 0.05 {
			t.Errorf("depth at %v (block axes): %.3f µm, want %.1f", tc.at, got, tc.want)
		}
	}
}
