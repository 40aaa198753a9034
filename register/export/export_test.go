package export

import (
	"context"
	"encoding/binary"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"ferry/internal/remedy"
	"ferry/landmarks"
	"ferry/register"
	"ferry/status"
	"ferry/transform"
)

// testSpline is a 3-D (or 2-D) thin-plate spline through a smooth warp of
// 30 landmarks over a 400 × 300 × 200 µm box.
func testSpline(t testing.TB, dim int) *transform.Spline {
	t.Helper()
	rng := rand.New(rand.NewPCG(3, uint64(dim)))
	var src, dst []transform.Vec
	for range 30 {
		p := transform.Vec{400 * rng.Float64(), 300 * rng.Float64(), 0}
		if dim == 3 {
			p[2] = 200 * rng.Float64()
		}
		q := transform.Vec{0.9*p[0] - 0.1*p[1] + 50 + 6*math.Sin(p[1]/40), 0.1*p[0] + 1.05*p[1] - 10 + 5*math.Cos(p[0]/55), 0}
		if dim == 3 {
			q[2] = 0.8*p[2] + 20 + 4*math.Sin(p[0]/50+p[1]/70)
		}
		src, dst = append(src, p), append(dst, q)
	}
	res, err := transform.Fit(transform.TPS, dim, src, dst, transform.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return res.Transform.(*transform.Spline)
}

func sample(t testing.TB, s *transform.Spline, opt GridOptions) *Field {
	t.Helper()
	g, err := FieldGrid(s, opt)
	if err != nil {
		t.Fatal(err)
	}
	a, b, err := transform.AffinePart(s)
	if err != nil {
		t.Fatal(err)
	}
	fd, err := SampleField(context.Background(), s, a, b, g, nil)
	if err != nil {
		t.Fatal(err)
	}
	return fd
}

func TestNiceAbove(t *testing.T) {
	for _, tc := range []struct{ x, want float64 }{
		{0.7, 1}, {1, 1}, {1.01, 2}, {2.2, 2.5}, {3, 5}, {7, 10}, {12, 20}, {0.013, 0.02}, {240, 250},
	} {
		if got := niceAbove(tc.x); math.Abs(got-tc.want) > 1e-12*tc.want {
			t.Errorf("niceAbove(%g) = %g, want %g", tc.x, got, tc.want)
		}
	}
}

// The grid covers the landmarks' box with its margin, and a grid too large
// for the machine is refused up front, saying what to do.
func TestFieldGrid(t *testing.T) {
	s := testSpline(t, 3)
	g, err := FieldGrid(s, GridOptions{Spacing: transform.Vec{10, 10, 10}, Margin: 5})
	if err != nil {
		t.Fatal(err)
	}
	end := g.End()
	for _, p := range s.Nodes {
		for k := range 3 {
			if p[k]-5 < g.Origin[k]-1e-9 || p[k]+5 > end[k]+1e-9 {
				t.Errorf("node %v with its margin outside the grid %v to %v", p, g.Origin, end)
			}
		}
	}
	for k := range 3 {
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, p := range s.Nodes {
			lo, hi = math.Min(lo, p[k]), math.Max(hi, p[k])
		}
		if end[k] > hi+5+10+1e-9 {
			t.Errorf("axis %d: the grid ends at %g µm, more than a spacing past %g µm", k, end[k], hi+5)
		}
	}
	if _, err := FieldGrid(s, GridOptions{Spacing: transform.Vec{0.1, 0.1, 0.1}, Margin: 5}); err == nil || !strings.Contains(err.Error(), "give a larger spacing or a smaller margin") ||
		!strings.Contains(remedy.Named(err, flagOf), "give a larger --spacing or a smaller --margin") {
		t.Errorf("a 0.1 µm grid: error %v, want a refusal asking for a larger spacing (--spacing)", err)
	}
	d, err := FieldGrid(s, GridOptions{Margin: -1})
	if err != nil {
		t.Fatal(err)
	}
	if n := max(d.Size[0], d.Size[1], d.Size[2]); n < DefaultIntervals/2 || n > DefaultIntervals+1 {
		t.Errorf("default grid %v: longest side %d samples, want about %d", d.Size, n, DefaultIntervals+1)
	}
}

// At the grid's own samples both forms reproduce the spline to float32
// rounding; between them the error is the interpolation's and shrinks like
// the square of the spacing (linear interpolation of a smooth function).
func TestFieldSamplingError(t *testing.T) {
	for _, dim := range []int{2, 3} {
		s := testSpline(t, dim)
		coarse := sample(t, s, GridOptions{Spacing: transform.Vec{20, 20, 20}, Margin: 10})
		g := coarse.Grid
		for _, ijk := range [][3]int{{0, 0, 0}, {3, 5, min(2, g.Size[2]-1)}, {g.Size[0] - 1, g.Size[1] - 1, g.Size[2] - 1}} {
			x := g.At(ijk[0], ijk[1], ijk[2])
			want := s.Apply(x)
			for name, got := range map[string]transform.Vec{"total": coarse.ApplyTotal(x), "sequence": coarse.ApplySequence(x)} {
				if e := got.Sub(want).Norm(); e > 1e-4 {
					t.Errorf("%d-D %s at sample %v: off by %g µm", dim, name, ijk, e)
				}
			}
		}
		fine := sample(t, s, GridOptions{Spacing: transform.Vec{10, 10, 10}, Margin: 10})
		// The same points, inside both grids.
		pts := g.RandomPoints(3000, 9)
		ct, cs := coarse.Errors(s, pts)
		ft, _ := fine.Errors(s, pts)
		if ct.MaxUM <= 0 || ct.RMSUM <= 0 {
			t.Fatalf("%d-D: sampling error %v is zero: the check cannot fail", dim, ct)
		}
		if math.Abs(ct.RMSUM-cs.RMSUM) > 1e-3*ct.RMSUM+1e-5 {
			t.Errorf("%d-D: the two forms differ: %v and %v (linear interpolation reproduces the affine part exactly)", dim, ct, cs)
		}
		ratio := ct.RMSUM / ft.RMSUM
		if ratio < 2.5 || ratio > 6 {
			t.Errorf("%d-D: halving the spacing cut the RMS error by %.2f (from %v to %v), want about 4", dim, ratio, ct, ft)
		}
	}
}

// The 4×4 matrix in voxels maps voxel indices as the µm matrix maps
// positions.
func TestHomogeneousInVoxels(t *testing.T) {
	h := NewHomogeneous(transform.Mat{{0.9, 0.1, 0}, {-0.2, 1.1, 0.05}, {0, 0.03, 0.8}}, transform.Vec{10, -20, 5})
	sv, tv := &transform.Vec{0.5, 0.5, 2}, &transform.Vec{0.008, 0.008, 0.04}
	v := h.InVoxels(sv, tv)
	a, b := h.Linear()
	av, bv := v.Linear()
	idx := transform.Vec{100, 200, 30}
	um := a.MulVec(transform.Vec{idx[0] * sv[0], idx[1] * sv[1], idx[2] * sv[2]}).Add(b)
	got := av.MulVec(idx).Add(bv)
	for k := range 3 {
		if math.Abs(got[k]*tv[k]-um[k]) > 1e-9 {
			t.Errorf("axis %d: voxel matrix gives %g voxels = %g µm, the µm matrix %g µm", k, got[k], got[k]*tv[k], um[k])
		}
	}
	if v[3] != [4]float64{0, 0, 0, 1} {
		t.Errorf("last row %v", v[3])
	}
}

// The store holds the residual field where its metadata say: the array's
// chunks, read back by hand with the shape and chunk shape of zarr.json,
// give the field's values in NGFF axis order.
func TestWriteZarrLayout(t *testing.T) {
	s := testSpline(t, 3)
	fd := sample(t, s, GridOptions{Spacing: transform.Vec{25, 25, 25}, Margin: 0})
	dir := filepath.Join(t.TempDir(), "t.zarr")
	if err := fd.WriteZarr(dir); err != nil {
		t.Fatal(err)
	}
	var meta struct {
		Shape     []int `json:"shape"`
		ChunkGrid struct {
			Configuration struct {
				ChunkShape []int `json:"chunk_shape"`
			} `json:"configuration"`
		} `json:"chunk_grid"`
	}
	arrDir := filepath.Join(dir, DisplacementsPath, ArrayPath)
	data, err := os.ReadFile(filepath.Join(arrDir, "zarr.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(data, &meta); err != nil {
		t.Fatal(err)
	}
	g := fd.Grid
	if want := []int{3, g.Size[2], g.Size[1], g.Size[0]}; len(meta.Shape) != 4 || meta.Shape[1] != want[1] || meta.Shape[3] != want[3] {
		t.Fatalf("shape %v, want %v", meta.Shape, want)
	}
	cz := meta.ChunkGrid.Configuration.ChunkShape[1]
	rng := rand.New(rand.NewPCG(1, 1))
	for range 50 {
		i, j, k, c := rng.IntN(g.Size[0]), rng.IntN(g.Size[1]), rng.IntN(g.Size[2]), rng.IntN(3)
		chunk, err := os.ReadFile(filepath.Join(arrDir, "c", "0", strconv.Itoa(k/cz), "0", "0"))
		if err != nil {
			t.Fatal(err)
		}
		off := 4 * (((c*cz+k%cz)*g.Size[1]+j)*g.Size[0] + i)
		got := math.Float32frombits(binary.LittleEndian.Uint32(chunk[off:]))
		// component c is along NGFF axis c: z, y, x
		want := fd.Residual[((k*g.Size[1]+j)*g.Size[0]+i)*3+(2-c)]
		if got != want {
			t.Errorf("sample (%d,%d,%d) component %d: chunk holds %g, field %g", i, j, k, c, got, want)
		}
	}
}

// With Bounds the grid starts at the lower corner and ends at the first
// sample at or beyond the upper one, whatever the landmarks; a box without
// room along an axis is refused.
func TestFieldGridBounds(t *testing.T) {
	s := testSpline(t, 3)
	for _, tc := range []struct {
		name    string
		lo, hi  transform.Vec
		spacing float64
		size    [3]int
	}{
		{"the stack's box", transform.Vec{0, 0, 0}, transform.Vec{603, 603, 400}, 20, [3]int{32, 32, 21}},
		{"whole multiples", transform.Vec{-100, 50, 10}, transform.Vec{100, 150, 30}, 10, [3]int{21, 11, 3}},
		{"smaller than the landmarks' box", transform.Vec{100, 100, 50}, transform.Vec{105, 101, 51}, 2, [3]int{4, 2, 2}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			b := [2]transform.Vec{tc.lo, tc.hi}
			g, err := FieldGrid(s, GridOptions{Bounds: &b, Margin: 50, Spacing: transform.Vec{tc.spacing, tc.spacing, tc.spacing}})
			if err != nil {
				t.Fatal(err)
			}
			if g.Origin != tc.lo || g.Size != tc.size {
				t.Errorf("grid from %v with %v samples, want from %v with %v (the margin does not apply)", g.Origin, g.Size, tc.lo, tc.size)
			}
			end := g.End()
			for k := range 3 {
				if end[k] < tc.hi[k] || end[k]-tc.spacing >= tc.hi[k] {
					t.Errorf("axis %d ends at %g µm for an upper corner at %g", k, end[k], tc.hi[k])
				}
			}
		})
	}
	flat := [2]transform.Vec{{0, 0, 5}, {10, 10, 5}}
	if _, err := FieldGrid(s, GridOptions{Bounds: &flat}); err == nil || !strings.Contains(err.Error(), "bounds z") {
		t.Errorf("a box without depth: error %v, want a refusal naming z", err)
	}
}

// Cells whose source position lies outside the field's grid are counted
// in a note that asks for a box (--bounds); a box that holds them has no note.
func TestWriteNotesCellsOutsideTheField(t *testing.T) {
	s := testSpline(t, 3)
	file := &register.Registration{Transform: s}
	dir := t.TempDir()
	sources := []transform.Vec{{200, 150, 100}, {-300, 150, 100}, {200, 150, 600}}
	cells := &landmarks.PointSet{Dim: 3}
	var mapped []register.Mapped
	for i, p := range sources {
		cells.Points = append(cells.Points, landmarks.Point{ID: "c" + strconv.Itoa(i)})
		mapped = append(mapped, register.Mapped{Pos: s.Apply(p), R95: 2, Status: status.Extrapolated})
	}
	mappedPath := filepath.Join(dir, "mapped.csv")
	if err := register.WriteMappedTable(context.Background(), mappedPath, register.Provenance{Command: "map"}, cells, mapped, register.FrameTarget, nil); err != nil {
		t.Fatal(err)
	}
	tv := transform.Vec{1, 1, 1}
	around := [2]transform.Vec{{-350, 0, 0}, {400, 300, 650}}
	for _, tc := range []struct {
		name   string
		bounds *[2]transform.Vec
		want   string
	}{
		{"landmarks' box", nil, "2 of the 3 mapped cells lie outside the displacement field's box"},
		{"a box around them", &around, ""},
	} {
		t.Run(tc.name, func(t *testing.T) {
			res, err := Write(context.Background(), filepath.Join(t.TempDir(), "export"), file, Options{
				Mapped: mappedPath, TargetVoxel: &tv, Grid: GridOptions{Margin: -1, Bounds: tc.bounds, Spacing: transform.Vec{25, 25, 25}}})
			if err != nil {
				t.Fatal(err)
			}
			var words, named []string
			for _, n := range res.Notes {
				words = append(words, n.String())
				m, ok := n.(remedy.Message)
				if !ok {
					t.Fatalf("note %q is a %T, which names no inputs", n, n)
				}
				named = append(named, m.Named(flagOf))
			}
			notes, flagged := strings.Join(words, "\n"), strings.Join(named, "\n")
			if tc.want == "" && notes != "" || tc.want != "" && (!strings.Contains(notes, tc.want) || !strings.Contains(notes, "give a box in source µm")) {
				t.Errorf("notes %q, want %q and the box to give", notes, tc.want)
			}
			// The input to change is the box, which a command line names
			// with its own flag and the box's form.
			if tc.want != "" && (!strings.Contains(flagged, tc.want) || !strings.Contains(flagged, "give --bounds X0,Y0,Z0,X1,Y1,Z1 in source µm") || strings.Contains(notes, "--")) {
				t.Errorf("named notes %q, want %q and --bounds; in words %q, want no flag", flagged, tc.want, notes)
			}
		})
	}
}

// flagOf names the inputs of a message as a command line might.
func flagOf(in remedy.Input) string {
	return map[remedy.Input]string{remedy.OutputBox: "--bounds", remedy.TargetVoxel: "--target-voxel", remedy.GridSpacing: "--spacing", remedy.GridMargin: "--margin"}[in]
}
