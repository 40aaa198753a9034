package export

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"ferry/internal/parallel"
	"ferry/internal/remedy"
	"ferry/progress"
	"ferry/transform"
)

// MaxSamples bounds the grid of a displacement field: at 4 bytes a value,
// three components and two fields, 20 million samples take about half a
// gigabyte.
const MaxSamples = 20_000_000

// DefaultIntervals is the number of grid intervals along the longest side
// of the field's box when no spacing is given.
const DefaultIntervals = 48

// DefaultMarginShare is the margin added on every side of the landmarks'
// source bounding box, as a share of its longest side.
const DefaultMarginShare = 0.1

// Grid is a regular grid over the source: sample (i, j, k) is at
// Origin + (i·Spacing[0], j·Spacing[1], k·Spacing[2]) µm. In 2-D Size[2] is
// 1.
type Grid struct {
	Dim     int
	Origin  transform.Vec
	Spacing transform.Vec
	Size    [3]int
}

// Samples is the number of grid points.
func (g Grid) Samples() int { return g.Size[0] * g.Size[1] * g.Size[2] }

// At is the position of sample (i, j, k) in µm.
func (g Grid) At(i, j, k int) transform.Vec {
	return transform.Vec{
		g.Origin[0] + float64(i)*g.Spacing[0],
		g.Origin[1] + float64(j)*g.Spacing[1],
		g.Origin[2] + float64(k)*g.Spacing[2],
	}
}

// End is the position of the last sample, the far corner of the grid.
func (g Grid) End() transform.Vec { return g.At(g.Size[0]-1, g.Size[1]-1, g.Size[2]-1) }

// GridOptions choose the grid of a displacement field.
type GridOptions struct {
	// Spacing is the grid spacing in µm per axis; zero picks one with
	// DefaultIntervals intervals along the longest side, the same along
	// every axis.
	Spacing transform.Vec
	// Margin is added on every side of the landmarks' source bounding box,
	// in µm; negative picks DefaultMarginShare of its longest side.
	Margin float64
	// Bounds, when not nil, is the field's box in source µm, lower corner
	// then upper, in place of the landmarks' box and the margin: the box
	// of the whole in vivo stack, say, so that a program warping the
	// stack with the field finds a displacement everywhere in it. The
	// first sample is at the lower corner; the last at or beyond the upper.
	Bounds *[2]transform.Vec
}

// FieldGrid is the grid over the source bounding box of the spline's
// landmarks (its nodes), widened by the margin, or over opt.Bounds. It refuses a grid of more
// than MaxSamples points, saying how to make it coarser.
func FieldGrid(s *transform.Spline, opt GridOptions) (Grid, error) {
	if len(s.Nodes) == 0 {
		return Grid{}, fmt.Errorf("the spline has no landmarks to span a grid")
	}
	g := Grid{Dim: s.Dimension}
	lo, hi := s.Nodes[0], s.Nodes[0]
	for _, p := range s.Nodes {
		for k := range g.Dim {
			lo[k], hi[k] = math.Min(lo[k], p[k]), math.Max(hi[k], p[k])
		}
	}
	margin := opt.Margin
	if b := opt.Bounds; b != nil {
		lo, hi, margin = b[0], b[1], 0
		for k := range g.Dim {
			if !(hi[k] > lo[k]) || math.IsInf(lo[k], 0) || math.IsInf(hi[k], 0) {
				return Grid{}, fmt.Errorf("bounds %s %g to %g µm: want the lower corner first, each side longer than 0", "xyz"[k:k+1], lo[k], hi[k])
			}
		}
	}
	longest := 0.0
	for k := range g.Dim {
		longest = math.Max(longest, hi[k]-lo[k])
	}
	if margin < 0 {
		margin = DefaultMarginShare * longest
	}
	spacing := opt.Spacing
	if spacing == (transform.Vec{}) {
		h := niceAbove((longest + 2*margin) / DefaultIntervals)
		spacing = transform.Vec{h, h, h}
	}
	total := 1.0
	for k := range 3 {
		if k >= g.Dim {
			g.Size[k], g.Spacing[k] = 1, 1
			continue
		}
		if !(spacing[k] > 0) || math.IsInf(spacing[k], 0) {
			return Grid{}, fmt.Errorf("grid spacing %v µm along axis %d: want a positive number", spacing[k], k+1)
		}
		g.Origin[k] = lo[k] - margin
		g.Spacing[k] = spacing[k]
		n := math.Ceil((hi[k]+margin-g.Origin[k])/spacing[k]-1e-9) + 1
		total *= math.Max(n, 2)
		if total > MaxSamples {
			smaller := remedy.Ref{Input: remedy.GridMargin, Words: "margin"}
			if opt.Bounds != nil {
				smaller = remedy.Ref{Input: remedy.OutputBox, Words: "box"}
			}
			return Grid{}, remedy.Errorf("a grid of spacing %g × %g × %g µm over %.0f µm would hold more than %d samples: give a larger %s or a smaller %s",
				spacing[0], spacing[1], spacing[2], longest+2*margin, MaxSamples, remedy.Ref{Input: remedy.GridSpacing, Words: "spacing"}, smaller)
		}
		g.Size[k] = int(math.Max(n, 2))
	}
	return g, nil
}

// niceAbove is the smallest of 1, 2, 2.5 and 5 times a power of ten that
// is at least x: a grid spacing a person reads at a glance.
func niceAbove(x float64) float64 {
	if !(x > 0) {
		return 1
	}
	p := math.Pow(10, math.Floor(math.Log10(x)))
	for _, m := range []float64{1, 2, 2.5, 5, 10} {
		if m*p >= x*(1-1e-12) {
			return m * p
		}
	}
	return 10 * p
}

// Field is a displacement field of a spline sampled on a grid, in two
// forms:
//
//   - Total: D(x) = f(x) − x, so that x' = x + D(x) alone maps a source
//     point to the target (the TIFF);
//   - Residual: d(x) = A⁻¹·(f(x) − A·x − t), the displacement to apply
//     before the affine part, so that x' = A·(x + d(x)) + t (the OME-Zarr
//     sequence of displacements then affine).
//
// Both hold Dim components per sample, in x, y, z order, stored sample by
// sample: value c of sample (i, j, k) is at ((k·Size[1] + j)·Size[0] + i)·Dim + c.
type Field struct {
	Grid            Grid
	Affine          Homogeneous
	Total, Residual []float32
}

// SampleField samples f on g; a and t are its affine part (AffinePart),
// which must be invertible. Planes are computed on all cores; the result
// does not depend on their number. ctx stops the work between planes.
func SampleField(ctx context.Context, f transform.Transform, a transform.Mat, t transform.Vec, g Grid, rep progress.Reporter) (*Field, error) {
	inv, ok := a.Inverse()
	if !ok {
		return nil, fmt.Errorf("the affine part of the transform is singular: its displacement residual is undefined")
	}
	n := g.Samples() * g.Dim
	fd := &Field{Grid: g, Affine: NewHomogeneous(a, t), Total: make([]float32, n), Residual: make([]float32, n)}
	rep = progress.Of(rep)
	rep.Step("sampling the displacement field: rows", g.Size[1]*g.Size[2])
	defer rep.Finish()
	rows := g.Size[1] * g.Size[2]
	parallel.Ranges(rows, 1, func(lo, hi int) {
		for r := lo; r < hi; r++ {
			if ctx.Err() != nil {
				return
			}
			j, k := r%g.Size[1], r/g.Size[1]
			for i := range g.Size[0] {
				x := g.At(i, j, k)
				y := f.Apply(x)
				d := y.Sub(x)
				res := inv.MulVec(y.Sub(a.MulVec(x)).Sub(t))
				at := ((k*g.Size[1]+j)*g.Size[0] + i) * g.Dim
				for c := range g.Dim {
					fd.Total[at+c] = float32(d[c])
					fd.Residual[at+c] = float32(res[c])
				}
			}
			rep.Add(1)
		}
	})
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	for i, v := range fd.Total {
		if !finite32(v) || !finite32(fd.Residual[i]) {
			x := g.At(i/g.Dim%g.Size[0], i/g.Dim/g.Size[0]%g.Size[1], i/g.Dim/g.Size[0]/g.Size[1])
			return nil, fmt.Errorf("the displacement at source %v µm is not a finite float32 number", x)
		}
	}
	return fd, nil
}

// interpolate is the multilinear interpolation of field at x (inside the
// grid), component by component.
func (fd *Field) interpolate(field []float32, x transform.Vec) transform.Vec {
	g := fd.Grid
	var base [3]int
	var frac [3]float64
	for k := range g.Dim {
		u := (x[k] - g.Origin[k]) / g.Spacing[k]
		b := int(math.Floor(u))
		b = min(max(b, 0), g.Size[k]-2)
		base[k], frac[k] = b, u-float64(b)
	}
	var out transform.Vec
	corners := 1 << g.Dim
	for c := range corners {
		w := 1.0
		var idx [3]int
		for k := range g.Dim {
			bit := (c >> k) & 1
			idx[k] = base[k] + bit
			if bit == 1 {
				w *= frac[k]
			} else {
				w *= 1 - frac[k]
			}
		}
		at := ((idx[2]*g.Size[1]+idx[1])*g.Size[0] + idx[0]) * g.Dim
		for d := range g.Dim {
			out[d] += w * float64(field[at+d])
		}
	}
	return out
}

// ApplyTotal maps x through the total field: x + D(x), D interpolated.
func (fd *Field) ApplyTotal(x transform.Vec) transform.Vec {
	return x.Add(fd.interpolate(fd.Total, x))
}

// ApplySequence maps x as the OME-Zarr sequence does: A·(x + d(x)) + t, d
// interpolated.
func (fd *Field) ApplySequence(x transform.Vec) transform.Vec {
	a, t := fd.Affine.Linear()
	return a.MulVec(x.Add(fd.interpolate(fd.Residual, x))).Add(t)
}

// SamplingError is how far an interpolated field strays from the transform
// at random points of the grid's box, in µm.
type SamplingError struct {
	Points int     `json:"points"`
	RMSUM  float64 `json:"rms_um"`
	P95UM  float64 `json:"p95_um"`
	MaxUM  float64 `json:"max_um"`
}

// String is the error in a few words.
func (e SamplingError) String() string {
	return fmt.Sprintf("RMS %.3g µm, 95 %% within %.3g µm, largest %.3g µm at %d random points", e.RMSUM, e.P95UM, e.MaxUM, e.Points)
}

// RandomPoints are n points drawn uniformly in the grid's box from seed:
// the points at which the sampling error is measured.
func (g Grid) RandomPoints(n int, seed uint64) []transform.Vec {
	rng := rand.New(rand.NewPCG(seed, 0x5eed))
	end := g.End()
	pts := make([]transform.Vec, n)
	for i := range pts {
		for k := range g.Dim {
			pts[i][k] = g.Origin[k] + rng.Float64()*(end[k]-g.Origin[k])
		}
	}
	return pts
}

// Errors measures both forms of the field against f at pts.
func (fd *Field) Errors(f transform.Transform, pts []transform.Vec) (total, sequence SamplingError) {
	et := make([]float64, len(pts))
	es := make([]float64, len(pts))
	for i, p := range pts {
		want := f.Apply(p)
		et[i] = fd.ApplyTotal(p).Sub(want).Norm()
		es[i] = fd.ApplySequence(p).Sub(want).Norm()
	}
	return summarise(et), summarise(es)
}

func summarise(e []float64) SamplingError {
	s := SamplingError{Points: len(e)}
	if len(e) == 0 {
		return s
	}
	var ss float64
	for _, v := range e {
		ss += v * v
	}
	sorted := slices.Clone(e)
	slices.Sort(sorted)
	s.RMSUM = math.Sqrt(ss / float64(len(e)))
	s.P95UM = sorted[int(math.Ceil(0.95*float64(len(e))))-1]
	s.MaxUM = sorted[len(e)-1]
	return s
}

func finite32(v float32) bool { return !math.IsNaN(float64(v)) && !math.IsInf(float64(v), 0) }
