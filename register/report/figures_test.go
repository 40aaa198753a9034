package report

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"ferry/register"
	"ferry/transform"
)

func TestNiceLength(t *testing.T) {
	for _, tc := range []struct{ x, want float64 }{
		{1, 1}, {1.9, 1}, {2, 2}, {4.99, 2}, {5, 5}, {9.9, 5}, {10, 10}, {37, 20}, {0.07, 0.05}, {0, 0}, {math.Inf(1), 0},
	} {
		if got := niceLength(tc.x); math.Abs(got-tc.want) > 1e-12 {
			t.Errorf("niceLength(%v) = %v, want %v", tc.x, got, tc.want)
		}
	}
}

func TestBinomialRange(t *testing.T) {
	// Binomial(10, 0.5): P(K ≤ 1) = 11/1024 < 0.025 ≤ P(K ≤ 2) = 56/1024,
	// and P(K ≤ 7) = 968/1024 < 0.975 ≤ P(K ≤ 8) = 1013/1024.
	for _, tc := range []struct {
		n    int
		p, q float64
		want int
	}{
		{10, 0.5, 0.025, 2}, {10, 0.5, 0.975, 8}, {20, 0.05, 0.025, 0}, {20, 0.99, 0.975, 20}, {1, 0.5, 0.4, 0},
	} {
		if got := binomialRange(tc.n, tc.p, tc.q); got != tc.want {
			t.Errorf("binomialRange(%d, %v, %v) = %d, want %d", tc.n, tc.p, tc.q, got, tc.want)
		}
	}
}

// Scores placed at known χ² quantiles give known shares.
func TestCoverage(t *testing.T) {
	for _, dim := range []int{2, 3} {
		chi := distuv.ChiSquared{K: float64(dim)}
		// Ten landmarks at the quantiles 0.02, 0.12, …, 0.92, clear of the
		// levels; one flagged landmark with a huge score that must not count.
		ck := &register.CheckJSON{Dim: dim}
		for k := range 10 {
			ck.Landmarks = append(ck.Landmarks, register.LandmarkJSON{Score: chi.Quantile(0.02 + 0.1*float64(k))})
		}
		ck.Landmarks = append(ck.Landmarks, register.LandmarkJSON{Score: 1e6, Flag: "off"})
		cv := newCoverage(ck)
		if cv.n != 10 || len(cv.expected) != 20 || cv.expected[0] != 0.05 || cv.expected[19] != 0.99 {
			t.Fatalf("%d-D: n %d, levels %v", dim, cv.n, cv.expected)
		}
		for k, p := range cv.expected {
			// Quantile 0.02+0.1j is at most the quantile at p for j ≤ (p−0.02)/0.1.
			want := math.Min(1, (math.Floor((p-0.02)/0.1)+1)/10)
			if math.Abs(cv.observed[k]-want) > 1e-12 {
				t.Errorf("%d-D: at p = %.2f observed %v, want %v", dim, p, cv.observed[k], want)
			}
			if !(cv.low[k] <= p+1e-12 && p-1e-12 <= cv.high[k]) {
				t.Errorf("%d-D: at p = %.2f the binomial range [%v, %v] misses p", dim, p, cv.low[k], cv.high[k])
			}
		}
	}
}

// The arrows are the target-space errors carried back through J⁻¹.
func TestSourceErrors(t *testing.T) {
	a := transform.Mat{{0, 2, 0}, {0.5, 0, 0}, {0, 0, -1}}
	tr := &transform.Linear{Model: transform.Affine, D: 3, A: a, T: transform.Vec{100, 200, 300}}
	ck := &register.CheckJSON{Dim: 3, Landmarks: []register.LandmarkJSON{{LOOUM: []float64{2, 1, 3}}}}
	got, ok := sourceErrors(ck, []transform.Vec{{1, 2, 3}}, tr)
	// J e_src = e_tgt: (2·y, 0.5·x, −z) = (2, 1, 3) at e_src = (2, 1, −3).
	want := transform.Vec{2, 1, -3}
	if !ok[0] || got[0].Sub(want).Norm() > 1e-12 {
		t.Errorf("source error %v (%v), want %v", got[0], ok[0], want)
	}
	singular := &transform.Linear{Model: transform.Affine, D: 3, A: transform.Mat{{1, 0, 0}, {1, 0, 0}, {0, 0, 1}}}
	if _, ok := sourceErrors(ck, []transform.Vec{{0, 0, 0}}, singular); ok[0] {
		t.Error("a singular Jacobian gave an arrow")
	}
}

// The hull's edge on a disc of inside nodes is one closed line, every
// crossing halfway between an inside and an outside node.
func TestHullEdge(t *testing.T) {
	g := &uncertaintyGrid{f: field{hi: transform.Vec{20, 20}}, nx: 20, ny: 20}
	g.inside = make([]bool, g.nx*g.ny)
	for j := range g.ny {
		for i := range g.nx {
			g.inside[j*g.nx+i] = math.Hypot(g.x(i)-10, g.y(j)-10) < 6
		}
	}
	segs := g.hullEdge()
	if len(segs) == 0 {
		t.Fatal("no edge")
	}
	for _, s := range segs {
		for _, q := range s {
			// Crossings sit on a grid line through node centres and halfway
			// between two nodes along the other axis.
			fx, fy := q.x-math.Floor(q.x), q.y-math.Floor(q.y)
			if !(fx == 0.5 && fy == 0 || fx == 0 && fy == 0.5) {
				t.Fatalf("crossing at (%v, %v) is not halfway between nodes", q.x, q.y)
			}
			if r := math.Hypot(q.x-10, q.y-10); r < 4.5 || r > 7 {
				t.Fatalf("crossing at radius %v, want near 6", r)
			}
		}
	}
	lines := chain(segs)
	if len(lines) != 1 {
		t.Fatalf("%d lines, want one closed line", len(lines))
	}
	l := lines[0]
	if len(l) != len(segs)+1 || l[0] != l[len(l)-1] {
		t.Errorf("the line has %d points for %d segments and closed %v", len(l), len(segs), l[0] == l[len(l)-1])
	}
}

func TestByError(t *testing.T) {
	ls := []register.LandmarkJSON{{ID: "b", LOOErrorUM: 1}, {ID: "a", LOOErrorUM: 3}, {ID: "c", LOOErrorUM: 1}, {ID: "d", LOOErrorUM: 2}}
	got := byError(ls)
	want := []int{1, 3, 0, 2}
	for k := range want {
		if got[k] != want[k] {
			t.Fatalf("order %v, want %v", got, want)
		}
	}
}

// Cells mapped forward come back to their source through the inverse.
func TestPlaceCells(t *testing.T) {
	tr := &transform.Linear{Model: transform.Affine, D: 3, A: transform.Mat{{-1, 0, 0}, {0, 0.9, 0.1}, {0, 0, 0.8}}, T: transform.Vec{1e4, 5e3, 2e3}}
	src := []transform.Vec{{1, 2, 3}, {50, 60, 70}}
	cells := []register.MappedCell{{ID: "a", Placed: true, Target: tr.Apply(src[0]), Status: "ok"}, {ID: "b", Status: "no_inverse"}, {ID: "c", Placed: true, Target: tr.Apply(src[1])}}
	placed, missing, stride := placeCells(cells, tr)
	if missing != 1 || len(placed) != 2 || stride != 1 {
		t.Fatalf("%d placed, %d missing: want 2 and 1", len(placed), missing)
	}
	for k, p := range placed {
		if p.source.Sub(src[k]).Norm() > 1e-9 {
			t.Errorf("cell %d placed at %v, want %v", k, p.source, src[k])
		}
	}
}

// A long table is thinned to every k-th cell for the drawing.
func TestPlaceCellsThins(t *testing.T) {
	tr := &transform.Linear{Model: transform.Translation, D: 3, A: transform.Identity()}
	cells := make([]register.MappedCell, 2*maxDrawnCells+1)
	for i := range cells {
		cells[i] = register.MappedCell{Placed: true, Target: transform.Vec{float64(i)}}
	}
	placed, missing, stride := placeCells(cells, tr)
	if stride != 3 || missing != 0 || len(placed) != (len(cells)+2)/3 || len(placed) > maxDrawnCells || placed[1].source[0] != 3 {
		t.Errorf("stride %d, %d placed (second at %v), %d missing", stride, len(placed), placed[1].source, missing)
	}
}
