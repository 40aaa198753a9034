package imaging

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"ferry/transform"
)

// warpMap is a smooth nonlinear test map: an affine part plus sine waves of
// a few micrometres, inverted by Newton's method.
type warpMap struct {
	a   transform.Mat
	t   transform.Vec
	amp float64 // µm
	k   float64 // rad/µm
}

func (w warpMap) Kind() transform.Kind { return "test-warp" }
func (w warpMap) Dim() int             { return 3 }

func (w warpMap) Apply(p transform.Vec) transform.Vec {
	q := w.a.MulVec(p).Add(w.t)
	q[0] += w.amp * math.Sin(w.k*p[1])
	q[1] += w.amp * math.Sin(w.k*p[0])
	q[2] += 0.5 * w.amp * math.Sin(w.k*(p[0]+p[1]))
	return q
}

func (w warpMap) Jacobian(p transform.Vec) transform.Mat {
	j := w.a
	j[0][1] += w.amp * w.k * math.Cos(w.k*p[1])
	j[1][0] += w.amp * w.k * math.Cos(w.k*p[0])
	c := 0.5 * w.amp * w.k * math.Cos(w.k*(p[0]+p[1]))
	j[2][0] += c
	j[2][1] += c
	return j
}

func (w warpMap) Invert(q transform.Vec) (transform.Vec, error) {
	ainv, _ := w.a.Inverse()
	x := ainv.MulVec(q.Sub(w.t))
	for range 50 {
		r := w.Apply(x).Sub(q)
		if r.Norm() < 1e-11 {
			return x, nil
		}
		jinv, ok := w.Jacobian(x).Inverse()
		if !ok {
			break
		}
		x = x.Sub(jinv.MulVec(r))
	}
	return transform.Vec{}, transform.ErrNoConvergence
}

// coneMap is p + w·|p − c|: a kink as sharp as a 3-D thin-plate kernel's at
// its landmark, and stronger than any fitted one. It is one-to-one for
// |w| < 1.
type coneMap struct{ c, w transform.Vec }

func (m coneMap) Kind() transform.Kind { return "test-cone" }
func (m coneMap) Dim() int             { return 3 }

func (m coneMap) Apply(p transform.Vec) transform.Vec {
	return p.Add(m.w.Scale(p.Sub(m.c).Norm()))
}

func (m coneMap) Jacobian(p transform.Vec) transform.Mat {
	j := transform.Identity()
	d := p.Sub(m.c)
	if r := d.Norm(); r > 0 {
		for a := range 3 {
			for b := range 3 {
				j[a][b] += m.w[a] * d[b] / r
			}
		}
	}
	return j
}

// Invert solves p + w·r = q with r = |p − c|: p − c = (q − c) − w·r, so
// r² = |(q − c) − w·r|², a quadratic in r with one root r ≥ 0 when |w| < 1.
func (m coneMap) Invert(q transform.Vec) (transform.Vec, error) {
	d := q.Sub(m.c)
	a := 1 - m.w.Dot(m.w)
	b := 2 * d.Dot(m.w)
	c := -d.Dot(d)
	r := (-b + math.Sqrt(b*b-4*a*c)) / (2 * a)
	return m.c.Add(d.Sub(m.w.Scale(r))), nil
}

// failDisc is the identity whose inverse fails inside a disc of the xy
// plane, a stand-in for a spline that folds there.
type failDisc struct {
	c transform.Vec
	r float64 // µm
}

func (f failDisc) Kind() transform.Kind                { return "test-fail" }
func (f failDisc) Dim() int                            { return 3 }
func (f failDisc) Apply(p transform.Vec) transform.Vec { return p }
func (f failDisc) Jacobian(transform.Vec) transform.Mat {
	return transform.Identity()
}

func (f failDisc) Invert(q transform.Vec) (transform.Vec, error) {
	if math.Hypot(q[0]-f.c[0], q[1]-f.c[1]) < f.r {
		return transform.Vec{}, fmt.Errorf("test: %w", transform.ErrNoConvergence)
	}
	return q, nil
}

// linear is the affine map A·p + T as the transform package builds it.
func linear(a transform.Mat, t transform.Vec) *transform.Linear {
	return &transform.Linear{Model: transform.Affine, D: 3, A: a, T: t}
}

// splineFixture fits an interpolating 3-D thin-plate spline to n landmark
// pairs spread over 500 × 500 × 200 µm: a rotation by 5°, a 2 % stretch, a
// shift, a smooth warp of several µm and 0.5 µm of noise that the spline
// follows exactly, which makes it wiggle. The target positions of the first
// onPlane landmarks are moved onto the plane z = planeZ µm, so that the kinks
// of the 3-D kernel (φ = −r has a cone at every landmark) lie on a resampled
// plane.
func splineFixture(tb testing.TB, n, onPlane int, planeZ float64) transform.Transform {
	tb.Helper()
	rng := rand.New(rand.NewPCG(7, 11))
	c, s := math.Cos(5*math.Pi/180), math.Sin(5*math.Pi/180)
	a := transform.Mat{{1.02 * c, -1.02 * s, 0}, {1.02 * s, 1.02 * c, 0}, {0, 0, 1}}
	src := make([]transform.Vec, n)
	dst := make([]transform.Vec, n)
	for i := range n {
		p := transform.Vec{500 * rng.Float64(), 500 * rng.Float64(), 200 * rng.Float64()}
		q := a.MulVec(p).Add(transform.Vec{10, -5, 3})
		q[0] += 6 * math.Sin(p[1]/70)
		q[1] += 4 * math.Cos(p[0]/90)
		q[2] += 3 * math.Sin((p[0]+p[2])/80)
		for d := range 3 {
			q[d] += 0.5 * rng.NormFloat64()
		}
		if i < onPlane {
			q[2] = planeZ
		}
		src[i], dst[i] = p, q
	}
	res, err := transform.Fit(transform.TPS, 3, src, dst, transform.Options{})
	if err != nil {
		tb.Fatalf("fitting the test spline: %v", err)
	}
	return res.Transform
}

// positions runs the field and returns every pixel's position and status.
func positions(f *field) ([]transform.Vec, []bool, int) {
	w := f.grid.Width
	pos := make([]transform.Vec, w*f.grid.Height)
	ok := make([]bool, len(pos))
	n := f.run(func(j, i0 int, p []transform.Vec, good []bool) {
		copy(pos[j*w+i0:], p)
		copy(ok[j*w+i0:], good)
	})
	return pos, ok, n
}

// TestInterpolationBound checks the tolerance of the interpolated sampling
// positions against exact evaluation at every pixel of the plane.
func TestInterpolationBound(t *testing.T) {
	spline := splineFixture(t, 300, 12, 100)
	// A cone centred on the plane at a point between pixels.
	cone := coneMap{c: transform.Vec{14.03, 16.51, 10}, w: transform.Vec{0.3, -0.2, 0.1}}
	warp := warpMap{a: transform.Mat{{0.98, 0.05, 0}, {-0.04, 1.01, 0.02}, {0, 0.01, 1}}, t: transform.Vec{3, -2, 1}, amp: 4, k: 0.05}
	tests := []struct {
		name    string
		t       transform.Transform
		inverse bool
		grid    Grid
		tol     float64
		// saves requires the adaptive grid to evaluate at most this share
		// of the pixels.
		saves float64
		// offset moves the plane's origin, µm.
		offset transform.Vec
	}{
		{"linear", linear(transform.Mat{{0.9, 0.1, 0}, {-0.1, 1.1, 0.05}, {0, 0, 1}}, transform.Vec{5, 7, -2}), false, Grid{Width: 300, Height: 200, Voxel: transform.Vec{0.7, 0.7, 2}, Z: 10}, 0.05, 0.01, transform.Vec{}},
		{"warp", warp, false, Grid{Width: 300, Height: 260, Voxel: transform.Vec{0.5, 0.5, 2}, Z: 5}, 0.05, 0.25, transform.Vec{}},
		{"warp tight", warp, false, Grid{Width: 200, Height: 200, Voxel: transform.Vec{0.5, 0.5, 2}, Z: 5}, 0.005, 1.1, transform.Vec{}},
		{"warp forward", warp, true, Grid{Width: 300, Height: 260, Voxel: transform.Vec{0.5, 0.5, 2}, Z: 5}, 0.05, 0.25, transform.Vec{}},
		{"strong kink", cone, false, Grid{Width: 300, Height: 300, Voxel: transform.Vec{0.1, 0.1, 1}, Z: 10}, 0.05, 0.2, transform.Vec{}},
		{"strong kink forward", cone, true, Grid{Width: 300, Height: 300, Voxel: transform.Vec{0.1, 0.1, 1}, Z: 10}, 0.05, 0.2, transform.Vec{}},
		{"spline, landmarks on the plane", spline, false, Grid{Width: 260, Height: 260, Voxel: transform.Vec{2, 2, 1}, Z: 100}, 0.05, 0.7, transform.Vec{}},
		{"spline forward", spline, true, Grid{Width: 260, Height: 260, Voxel: transform.Vec{2, 2, 1}, Z: 100}, 0.05, 0.7, transform.Vec{}},
		// Fine pixels around a landmark that lies on the plane.
		{"spline near a kink", spline, false, Grid{Width: 200, Height: 200, Voxel: transform.Vec{0.05, 0.05, 1}, Z: 100}, 0.05, 0.5, transform.Vec{}},
		// Windows of the plane of BenchmarkResample4096, at its pixel size.
		{"spline, benchmark pixels", spline, false, Grid{Width: 400, Height: 300, Voxel: transform.Vec{0.125, 0.125, 1}, Z: 100}, 0.05, 0.1, transform.Vec{211.7, 143.2, 0}},
		{"spline, benchmark pixels forward", spline, true, Grid{Width: 400, Height: 300, Voxel: transform.Vec{0.125, 0.125, 1}, Z: 100}, 0.05, 0.1, transform.Vec{377.1, 402.9, 0}},
	}
	if testing.Short() {
		tests = tests[:6]
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			grid := tt.grid
			mapPoint := func(q transform.Vec) (transform.Vec, bool) {
				p, err := tt.t.Invert(q)
				return p, err == nil
			}
			if tt.inverse {
				mapPoint = func(q transform.Vec) (transform.Vec, bool) { return tt.t.Apply(q), true }
			}
			off := tt.offset
			if tt.name == "spline near a kink" {
				// Centre the window on the image of a landmark that was put
				// on the plane z = 100 µm.
				sp := tt.t.(*transform.Spline)
				q := sp.Apply(sp.Nodes[0])
				off = transform.Vec{q[0] - 5, q[1] - 5, 0}
				if math.Abs(q[2]-100) > 1e-6 {
					t.Fatalf("landmark 0 maps to z = %g µm, not onto the plane", q[2])
				}
			}
			if off != (transform.Vec{}) {
				inner := mapPoint
				mapPoint = func(v transform.Vec) (transform.Vec, bool) { return inner(v.Add(off)) }
			}
			exact := &field{grid: grid, mapPoint: mapPoint, check: tt.tol / 2, exact: true}
			adaptive := &field{grid: grid, mapPoint: mapPoint, check: tt.tol / 2}
			want, wantOK, _ := positions(exact)
			got, gotOK, evals := positions(adaptive)
			worst, at := 0.0, 0
			for n := range want {
				if gotOK[n] != wantOK[n] {
					t.Fatalf("pixel %d: ok %v, exact ok %v", n, gotOK[n], wantOK[n])
				}
				if d := got[n].Sub(want[n]).Norm(); d > worst {
					worst, at = d, n
				}
			}
			pixels := grid.Width * grid.Height
			t.Logf("largest error %.4f µm at pixel (%d, %d); %d evaluations for %d pixels", worst, at%grid.Width, at/grid.Width, evals, pixels)
			if worst > tt.tol {
				t.Errorf("interpolated position off by %.4f µm at pixel (%d, %d), bound %.4f µm", worst, at%grid.Width, at/grid.Width, tt.tol)
			}
			if float64(evals) > tt.saves*float64(pixels) {
				t.Errorf("%d evaluations for %d pixels: the grid saves less than expected", evals, pixels)
			}
		})
	}
}

// TestResampleValues checks sampled values where the answer is known.
func TestResampleValues(t *testing.T) {
	src := patternStack(t, 13, 7, 4, 16)
	voxel := transform.Vec{0.5, 0.5, 2}
	same := GridLike(src, voxel, 2)
	type want func(i, j int) (uint16, bool) // value, inside
	tests := []struct {
		name    string
		t       transform.Transform
		grid    Grid
		inverse bool
		want    want
		outside int
	}{
		{"identity", linear(transform.Identity(), transform.Vec{}), same, false,
			func(i, j int) (uint16, bool) { return pattern16(i, j, 2), true }, 0},
		{"shift by two columns", linear(transform.Identity(), transform.Vec{1, 0, 0}), same, false,
			func(i, j int) (uint16, bool) { return pattern16(i-2, j, 2), i >= 2 }, 2 * 7},
		{"shift, inverse", linear(transform.Identity(), transform.Vec{1, 0, 0}), same, true,
			func(i, j int) (uint16, bool) { return pattern16(i+2, j, 2), i+2 < 13 }, 2 * 7},
		{"half a page", linear(transform.Identity(), transform.Vec{0, 0, 1}), Grid{Width: 13, Height: 7, Voxel: voxel, Z: 3}, false,
			func(i, j int) (uint16, bool) {
				// Target z = 6 µm comes from source z = 5 µm, page 2.5.
				a, b := float64(pattern16(i, j, 2)), float64(pattern16(i, j, 3))
				return uint16(math.Floor((a+b)/2 + 0.5)), true
			}, 0},
		{"transposed", linear(transform.Mat{{0, 1, 0}, {1, 0, 0}, {0, 0, 1}}, transform.Vec{}), Grid{Width: 7, Height: 13, Voxel: voxel, Z: 0}, false,
			func(i, j int) (uint16, bool) { return pattern16(j, i, 0), true }, 0},
		{"outside in z", linear(transform.Identity(), transform.Vec{}), Grid{Width: 13, Height: 7, Voxel: voxel, Z: 4}, false,
			func(i, j int) (uint16, bool) { return 0, false }, 13 * 7},
		{"finer grid", linear(transform.Identity(), transform.Vec{}), Grid{Width: 25, Height: 13, Voxel: transform.Vec{0.25, 0.25, 2}, Z: 1}, false,
			func(i, j int) (uint16, bool) {
				// Every even pixel is a voxel centre; odd ones lie halfway.
				a := func(i, j int) float64 { return float64(pattern16(i, j, 1)) }
				x0, x1, y0, y1 := i/2, (i+1)/2, j/2, (j+1)/2
				v := (a(x0, y0) + a(x1, y0) + a(x0, y1) + a(x1, y1)) / 4
				return uint16(math.Floor(v + 0.5)), true
			}, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			out, rep, err := ResampleWithReport(tt.t, src, voxel, tt.grid, ResampleOptions{Inverse: tt.inverse})
			if err != nil {
				t.Fatal(err)
			}
			if out.Width != tt.grid.Width || out.Height != tt.grid.Height || out.Depth != 1 || out.Bits != 16 {
				t.Fatalf("output %d × %d × %d of %d bits", out.Width, out.Height, out.Depth, out.Bits)
			}
			for j := range out.Height {
				for i := range out.Width {
					v, in := tt.want(i, j)
					if !in {
						v = 0
					}
					if got := out.At(i, j, 0); got != v {
						t.Fatalf("pixel (%d, %d) = %d, want %d", i, j, got, v)
					}
				}
			}
			if rep.Outside != tt.outside || rep.NoConvergence != 0 || rep.Pixels != tt.grid.Width*tt.grid.Height {
				t.Errorf("report %+v, want %d outside", rep, tt.outside)
			}
			if want := float64(tt.outside) / float64(rep.Pixels); rep.OutsideShare() != want {
				t.Errorf("outside share %g, want %g", rep.OutsideShare(), want)
			}
		})
	}
}

// TestResampleNoConvergence checks that pixels where the inverse fails are
// 0 and counted exactly, without aborting.
func TestResampleNoConvergence(t *testing.T) {
	src, _ := NewStack(400, 300, 1, 8)
	for n := range src.Data {
		src.Data[n] = 200
	}
	voxel := transform.Vec{1, 1, 1}
	grid := Grid{Width: 400, Height: 300, Voxel: voxel, Z: 0}
	disc := failDisc{c: transform.Vec{151.3, 122.7, 0}, r: 61.5}
	for _, exact := range []bool{false, true} {
		out, rep, err := ResampleWithReport(disc, src, voxel, grid, ResampleOptions{Exact: exact})
		if err != nil {
			t.Fatal(err)
		}
		failed := 0
		for j := range grid.Height {
			for i := range grid.Width {
				in := math.Hypot(float64(i)-disc.c[0], float64(j)-disc.c[1]) < disc.r
				if in {
					failed++
				}
				if v := out.At(i, j, 0); (v == 0) != in {
					t.Fatalf("exact %v: pixel (%d, %d) = %d, in the failed disc %v", exact, i, j, v, in)
				}
			}
		}
		if rep.NoConvergence != failed || rep.Outside != 0 {
			t.Errorf("exact %v: %d pixels counted as failed and %d outside, want %d and 0", exact, rep.NoConvergence, rep.Outside, failed)
		}
		if rep.NoConvergenceShare() != float64(failed)/float64(grid.Width*grid.Height) {
			t.Errorf("failed share %g", rep.NoConvergenceShare())
		}
	}
}

func TestResampleErrors(t *testing.T) {
	src := patternStack(t, 4, 3, 2, 8)
	id := linear(transform.Identity(), transform.Vec{})
	v := transform.Vec{1, 1, 1}
	tests := []struct {
		name  string
		t     transform.Transform
		src   *Stack
		voxel transform.Vec
		grid  Grid
		opt   ResampleOptions
		want  string
	}{
		{"no transform", nil, src, v, Grid{Width: 4, Height: 3, Voxel: v}, ResampleOptions{}, "no transform"},
		{"no stack", id, nil, v, Grid{Width: 4, Height: 3, Voxel: v}, ResampleOptions{}, "no stack"},
		{"bad stack", id, &Stack{Width: 4, Height: 3, Depth: 2, Bits: 8}, v, Grid{Width: 4, Height: 3, Voxel: v}, ResampleOptions{}, "samples"},
		{"zero voxel", id, src, transform.Vec{1, 0, 1}, Grid{Width: 4, Height: 3, Voxel: v}, ResampleOptions{}, "positive"},
		{"NaN grid voxel", id, src, v, Grid{Width: 4, Height: 3, Voxel: transform.Vec{math.NaN(), 1, 1}, Z: 0}, ResampleOptions{}, "output plane"},
		{"empty grid", id, src, v, Grid{Width: 0, Height: 3, Voxel: v}, ResampleOptions{}, "at least 1"},
		{"huge grid", id, src, v, Grid{Width: 1 << 21, Height: 3, Voxel: v}, ResampleOptions{}, "at most"},
		{"huge plane", id, src, v, Grid{Width: 1 << 20, Height: 1 << 20, Voxel: v}, ResampleOptions{}, "at most"},
		{"negative tolerance", id, src, v, Grid{Width: 4, Height: 3, Voxel: v}, ResampleOptions{ToleranceUM: -1}, "tolerance"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := Resample(tt.t, tt.src, tt.voxel, tt.grid, tt.opt)
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %v, want one mentioning %q", err, tt.want)
			}
		})
	}
}

// BenchmarkResample4096 resamples a 512 × 512 × 50 source stack onto a
// 4096 × 4096 target plane through a 3-D thin-plate spline fitted to 300
// landmarks.
func BenchmarkResample4096(b *testing.B) {
	spline := splineFixture(b, 300, 0, 100)
	src, _ := NewStack(512, 512, 50, 16)
	for n := range src.Data {
		src.Data[n] = uint16(n * 2654435761 >> 16)
	}
	voxel := transform.Vec{1, 1, 4}
	grid := Grid{Width: 4096, Height: 4096, Voxel: transform.Vec{0.125, 0.125, 1}, Z: 100}
	var rep ResampleReport
	b.ResetTimer()
	for b.Loop() {
		var err error
		_, rep, err = ResampleWithReport(spline, src, voxel, grid, ResampleOptions{})
		if err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(rep.Evaluations), "evaluations")
	b.ReportMetric(100*rep.OutsideShare(), "%outside")
}
