package simulate

import (
	"math"
	"testing"

	"ferry/transform"
)

// finiteJacobian is the central-difference derivative of f at p.
func finiteJacobian(f func(transform.Vec) transform.Vec, p transform.Vec, h float64) transform.Mat {
	var j transform.Mat
	for c := range 3 {
		a, b := p, p
		a[c] -= h
		b[c] += h
		d := f(b).Sub(f(a)).Scale(1 / (2 * h))
		for r := range 3 {
			j[r][c] = d[r]
		}
	}
	return j
}

// fieldPoints is a coarse grid of points through the field.
func fieldPoints(field transform.Vec) []transform.Vec {
	var pts []transform.Vec
	for _, fx := range []float64{0, 0.3, 0.5, 0.8, 1} {
		for _, fy := range []float64{0, 0.4, 1} {
			for _, fz := range []float64{0, 0.25, 0.5, 0.75, 1} {
				pts = append(pts, transform.Vec{fx * field[0], fy * field[1], fz * field[2]})
			}
		}
	}
	return pts
}

func TestTrueMapHandedness(t *testing.T) {
	for _, tt := range []struct {
		name     string
		mirror   bool
		negative bool
	}{
		{"mirrored", true, true},
		{"not mirrored", false, false},
	} {
		t.Run(tt.name, func(t *testing.T) {
			p := DefaultParams()
			p.Mirror = tt.mirror
			s, err := Generate(p, 3)
			if err != nil {
				t.Fatal(err)
			}
			for _, q := range fieldPoints(p.FieldUM) {
				det := finiteJacobian(s.TrueMap, q, 0.01).Det()
				if (det < 0) != tt.negative {
					t.Errorf("Jacobian determinant %.4f at %v µm: want negative %v", det, q, tt.negative)
				}
				// The volume change is the product of the shrinkages
				// (the warp is gentle): between 0.88·0.92·0.72 and
				// 0.88·0.92·0.80, give or take the warp.
				if a := math.Abs(det); a < 0.5 || a > 0.7 {
					t.Errorf("|det J| = %.4f at %v µm: want the volume shrinkage near 0.55–0.65", a, q)
				}
			}
		})
	}
}

func TestTrueJacobianMatchesFiniteDifferences(t *testing.T) {
	for _, seed := range []uint64{1, 2} {
		s, err := Generate(SmallParams(), seed)
		if err != nil {
			t.Fatal(err)
		}
		for _, q := range fieldPoints(s.Params.FieldUM) {
			got := s.TrueJacobian(q)
			want := finiteJacobian(s.TrueMap, q, 1e-3)
			for r := range 3 {
				for c := range 3 {
					if math.Abs(got[r][c]-want[r][c]) > 1e-6 {
						t.Fatalf("seed %d at %v µm: J[%d][%d] = %.9f, finite differences %.9f", seed, q, r, c, got[r][c], want[r][c])
					}
				}
			}
		}
	}
}

func TestTrueMapDepthCompression(t *testing.T) {
	// Without rotation and warp, the local depth compression is exactly
	// the linear profile from the top value to the bottom value.
	p := DefaultParams()
	p.RotationDeg = transform.Vec{}
	p.WarpBumps = 0
	s, err := Generate(p, 5)
	if err != nil {
		t.Fatal(err)
	}
	prev := math.Inf(1)
	for _, z := range []float64{0, 100, 200, 300, 400} {
		j := finiteJacobian(s.TrueMap, transform.Vec{300, 300, z}, 0.01)
		want := p.ZCompressionTop + (p.ZCompressionBottom-p.ZCompressionTop)*z/p.FieldUM[2]
		if math.Abs(j[2][2]-want) > 1e-6 {
			t.Errorf("∂z_target/∂z_source at depth %v µm = %.6f, want %.6f", z, j[2][2], want)
		}
		if j[2][2] >= prev {
			t.Errorf("compression at depth %v µm (%.4f) is not stronger than above (%.4f)", z, j[2][2], prev)
		}
		prev = j[2][2]
		if math.Abs(math.Abs(j[0][0])-p.LateralShrink[0]) > 1e-6 || math.Abs(j[1][1]-p.LateralShrink[1]) > 1e-6 {
			t.Errorf("lateral scale at depth %v µm = %.4f, %.4f, want ±%v, %v", z, j[0][0], j[1][1], p.LateralShrink[0], p.LateralShrink[1])
		}
	}
	// The whole depth of the field shrinks by the mean compression.
	top := s.TrueMap(transform.Vec{300, 300, 0})
	bottom := s.TrueMap(transform.Vec{300, 300, 400})
	want := 400 * (p.ZCompressionTop + p.ZCompressionBottom) / 2
	if d := bottom[2] - top[2]; math.Abs(d-want) > 1e-9 {
		t.Errorf("the 400 µm field is %.6f µm deep in EM, want %.6f", d, want)
	}

	// With the default rotation and warp the deep tissue is still the more
	// compressed, on average over the field.
	s, err = Generate(DefaultParams(), 5)
	if err != nil {
		t.Fatal(err)
	}
	mean := func(z float64) float64 {
		sum := 0.0
		n := 0
		for x := 50.0; x < 600; x += 100 {
			for y := 50.0; y < 600; y += 100 {
				sum += finiteJacobian(s.TrueMap, transform.Vec{x, y, z}, 0.01)[2][2]
				n++
			}
		}
		return sum / float64(n)
	}
	if top, deep := mean(20), mean(380); !(deep < top-0.04) {
		t.Errorf("mean depth compression %.4f near the pia and %.4f deep: want clearly stronger deep", top, deep)
	}
}

func TestTrueMapOffsetAndInverse(t *testing.T) {
	p := DefaultParams()
	s, err := Generate(p, 11)
	if err != nil {
		t.Fatal(err)
	}
	// The field's centre lands at the offset, moved by the warp only.
	reach := float64(p.WarpBumps) * p.WarpAmplitudeUM[1]
	if d := s.TrueMap(p.FieldUM.Scale(0.5)).Sub(p.OffsetUM).Norm(); d > reach {
		t.Errorf("the field centre lands %.2f µm from the offset, more than the warp can move it (%.1f µm)", d, reach)
	}
	for _, q := range fieldPoints(p.FieldUM) {
		back, err := s.TrueInverse(s.TrueMap(q))
		if err != nil {
			t.Fatalf("TrueInverse at %v µm: %v", q, err)
		}
		if d := back.Sub(q).Norm(); d > 1e-6 {
			t.Errorf("TrueInverse(TrueMap(%v)) is %.3g µm off", q, d)
		}
	}
	if _, err := s.TrueInverse(transform.Vec{math.NaN(), 0, 0}); err == nil {
		t.Error("TrueInverse accepted a NaN")
	}
}

func TestWarpAmplitude(t *testing.T) {
	p := DefaultParams()
	s, err := Generate(p, 13)
	if err != nil {
		t.Fatal(err)
	}
	// The warp is what remains once the closed-form linear part is taken
	// off; its largest value over the field lies within the bumps' range.
	p.WarpBumps = 0
	lin, err := Generate(p, 13)
	if err != nil {
		t.Fatal(err)
	}
	largest := 0.0
	for _, q := range fieldPoints(p.FieldUM) {
		largest = math.Max(largest, s.TrueMap(q).Sub(lin.TrueMap(q)).Norm())
	}
	if largest < 2 || largest > float64(len(s.Map.Bumps))*p.WarpAmplitudeUM[1] {
		t.Errorf("largest warp displacement %.2f µm: want a few micrometres", largest)
	}
	for i, b := range s.Map.Bumps {
		if n := b.DisplacementUM.Norm(); n < p.WarpAmplitudeUM[0] || n > p.WarpAmplitudeUM[1] {
			t.Errorf("bump %d moves %.2f µm, outside %v", i, n, p.WarpAmplitudeUM)
		}
	}
}
