package imaging

import (
	"fmt"
	"math"
	"sync/atomic"

	"ferry/transform"
)

// DefaultToleranceUM is the largest distance, in µm, by which Resample's
// interpolated sampling positions may differ from the exactly mapped ones.
const DefaultToleranceUM = 0.05

// Grid is the pixel grid of one output plane: Width × Height pixels of a
// space whose voxels measure Voxel µm, at page Z of that space. Pixel (i, j)
// sits at Origin + (i·Voxel[0], j·Voxel[1], Z·Voxel[2]) µm; Origin is zero
// for the voxel grid of docs/formats.md ("Images").
type Grid struct {
	Width, Height int
	Voxel         transform.Vec
	Z             int
	Origin        transform.Vec
}

// Geometry is the geometry of the plane as a stack of one page, to record
// in the file it is written to.
func (g Grid) Geometry() Geometry {
	o := g.Origin
	o[2] += float64(g.Z) * g.Voxel[2]
	return Geometry{VoxelUM: g.Voxel, OriginUM: o, HasOrigin: [3]bool{true, true, true}}
}

// GridLike is the grid of plane z of a space with voxels of voxel µm whose
// planes have the size of like (for `ferry resample --like`).
func GridLike(like *Stack, voxel transform.Vec, z int) Grid {
	return Grid{Width: like.Width, Height: like.Height, Voxel: voxel, Z: z}
}

// ResampleOptions steer Resample.
type ResampleOptions struct {
	// Inverse resamples a stack of the transform's target space onto a
	// plane of its source space, mapping each output pixel with Apply
	// instead of Invert; srcVoxel is then the target voxel size and the
	// Grid a source plane.
	Inverse bool
	// ToleranceUM bounds the error of the interpolated sampling positions,
	// in µm; zero means DefaultToleranceUM.
	ToleranceUM float64
	// Exact maps every output pixel exactly instead of interpolating: slow
	// for a spline, and never needed for accuracy.
	Exact bool
	// StackOrigin is the position of the input stack's voxel (0, 0, 0),
	// µm; zero for the voxel grid of docs/formats.md ("Images").
	StackOrigin transform.Vec
}

// ResampleReport counts what happened to the output pixels.
type ResampleReport struct {
	// Pixels is the number of output pixels.
	Pixels int
	// Outside counts pixels whose sampling position fell outside the input
	// stack; they are 0.
	Outside int
	// NoConvergence counts pixels where the map could not be evaluated
	// (an inverse that did not converge, or a non-finite position); they
	// are 0 and not counted as Outside.
	NoConvergence int
	// Evaluations is the number of exact evaluations of the map.
	Evaluations int
}

// OutsideShare is the fraction of output pixels that fell outside the input.
func (r ResampleReport) OutsideShare() float64 {
	if r.Pixels == 0 {
		return 0
	}
	return float64(r.Outside) / float64(r.Pixels)
}

// NoConvergenceShare is the fraction of output pixels left 0 because the
// map could not be evaluated there.
func (r ResampleReport) NoConvergenceShare() float64 {
	if r.Pixels == 0 {
		return 0
	}
	return float64(r.NoConvergence) / float64(r.Pixels)
}

// Resample returns the plane grid of the target space filled from src, a
// stack of the source space with voxels of srcVoxel µm: output pixel (i, j)
// takes the value of src at t⁻¹ of its position, sampled by trilinear
// interpolation between voxel centres. With opt.Inverse the roles of the
// spaces swap and t itself maps the pixels. See ResampleWithReport.
func Resample(t transform.Transform, src *Stack, srcVoxel transform.Vec, grid Grid, opt ResampleOptions) (*Stack, error) {
	out, _, err := ResampleWithReport(t, src, srcVoxel, grid, opt)
	return out, err
}

// ResampleWithReport is Resample that also reports how many pixels fell
// outside src or could not be mapped.
//
// The input stack covers, along each axis, from half a voxel before its
// first voxel centre to half a voxel after its last; a sampling position
// outside that box gives 0 and counts as Outside, and within the outer
// half voxel the edge voxels are extended.
//
// Mapping every pixel exactly through a spline's Newton inverse would take
// minutes for a large plane, so the map is evaluated exactly on an adaptive
// grid and interpolated bilinearly in between. The plane is tiled with
// cells of 64 × 64 pixels. For each cell the map is evaluated at its four
// corners, the midpoints of its four edges and its centre; the bilinear
// interpolant of the corners is compared with the exact map at the five
// midpoints, and the cell is split in four until every midpoint is within
// half the tolerance. Bilinear interpolation of a smooth map errs most near
// the centre or the edge midpoints of a cell, and for a map with a kink,
// such as the cone of a 3-D thin-plate kernel at a landmark, at most twice
// as much as at the nearest midpoint, which the factor of one half covers;
// tests check the bound against exact evaluation at every pixel. The
// midpoints of a split cell are its children's corners, so no evaluation is
// wasted. A cell of one pixel is evaluated exactly.
//
// Where the map fails at some but not all nine points of a cell, the cell is
// split down to single pixels, so that failed pixels are found exactly at
// the edge of the region where the map fails; a cell where all nine fail is
// taken to fail throughout (exact for convex failed regions).
func ResampleWithReport(t transform.Transform, src *Stack, srcVoxel transform.Vec, grid Grid, opt ResampleOptions) (*Stack, ResampleReport, error) {
	var rep ResampleReport
	if t == nil {
		return nil, rep, fmt.Errorf("imaging: resample: no transform")
	}
	if err := src.check(); err != nil {
		return nil, rep, fmt.Errorf("imaging: resample: %w", err)
	}
	if err := checkVoxel(srcVoxel); err != nil {
		return nil, rep, fmt.Errorf("imaging: resample: voxel size of %s: %w", src.name(), err)
	}
	if err := checkVoxel(grid.Voxel); err != nil {
		return nil, rep, fmt.Errorf("imaging: resample: voxel size of the output plane: %w", err)
	}
	if grid.Width > 1<<20 || grid.Height > 1<<20 || grid.Width*grid.Height > 1<<31 {
		return nil, rep, fmt.Errorf("imaging: resample: output plane of %d × %d pixels: at most 1048576 a side and 2³¹ in all", grid.Width, grid.Height)
	}
	tol := opt.ToleranceUM
	if tol == 0 {
		tol = DefaultToleranceUM
	}
	if !(tol > 0) || math.IsInf(tol, 0) {
		return nil, rep, fmt.Errorf("imaging: resample: tolerance %v µm: want a positive number", opt.ToleranceUM)
	}
	out, err := NewStack(grid.Width, grid.Height, 1, src.Bits)
	if err != nil {
		return nil, rep, fmt.Errorf("imaging: resample: output plane: %w", err)
	}
	out.Geometry = grid.Geometry()

	mapPoint := targetToSource(t, opt.Inverse)
	f := &field{grid: grid, mapPoint: mapPoint, check: tol / 2, exact: opt.Exact}
	smp := newSampler(src, srcVoxel, opt.StackOrigin)
	var outside, failed atomic.Int64
	rep.Evaluations = f.run(func(j, i0 int, pos []transform.Vec, ok []bool) {
		nOut, nFail := smp.sampleRow(out.Data[j*grid.Width+i0:][:len(pos)], pos, ok)
		if nOut > 0 {
			outside.Add(int64(nOut))
		}
		if nFail > 0 {
			failed.Add(int64(nFail))
		}
	})
	rep.Pixels = grid.Width * grid.Height
	rep.Outside = int(outside.Load())
	rep.NoConvergence = int(failed.Load())
	return out, rep, nil
}

// checkVoxel requires three positive finite voxel sides.
func checkVoxel(v transform.Vec) error {
	for _, x := range v {
		if !(x > 0) || math.IsInf(x, 0) {
			return fmt.Errorf("%g × %g × %g µm: every side must be a positive number of µm", v[0], v[1], v[2])
		}
	}
	return nil
}

// sampler interpolates a stack trilinearly at positions in µm. It reads
// the stack page by page, so that warp can hand it only the pages a stretch
// of output needs (nil elsewhere).
type sampler struct {
	pages  [][]uint16
	inv    transform.Vec // voxels per µm
	origin transform.Vec // µm
	// Per axis: the upper end of the stack's extent in voxels (centres at
	// 0 … n−1, extent −½ … n−½), the largest lower neighbour index, the
	// index step to the upper neighbour (0 for a single voxel) and, for x
	// and y, the stride within a page.
	hi     [3]float64
	top    [3]int
	next   [3]int
	stride [2]int
}

func newSampler(s *Stack, voxel, origin transform.Vec) *sampler {
	pages := make([][]uint16, s.Depth)
	for k := range pages {
		pages[k] = s.PageData(k)
	}
	return newPageSampler(pages, s.Width, s.Height, voxel, origin)
}

func newPageSampler(pages [][]uint16, width, height int, voxel, origin transform.Vec) *sampler {
	sm := &sampler{pages: pages, inv: transform.Vec{1 / voxel[0], 1 / voxel[1], 1 / voxel[2]}, origin: origin}
	n := [3]int{width, height, len(pages)}
	sm.stride = [2]int{1, width}
	for a := range 3 {
		sm.hi[a] = float64(n[a]) - 0.5
		sm.top[a] = max(n[a]-2, 0)
		sm.next[a] = min(n[a]-1, 1)
		if a < 2 {
			sm.next[a] *= sm.stride[a]
		}
	}
	return sm
}

// pageRange is the range of pages k0 … k1 that trilinear sampling at the
// positions reads; ok is false when every position is outside or failed.
func (sm *sampler) pageRange(pos []transform.Vec, good []bool) (k0, k1 int, ok bool) {
	iz, oz, hz := sm.inv[2], sm.origin[2], sm.hi[2]
	k0, k1 = math.MaxInt, -1
	for n, p := range pos {
		if !good[n] {
			continue
		}
		w := (p[2] - oz) * iz
		if !(w >= -0.5 && w < hz) {
			continue
		}
		k := min(int(max(w, 0)), sm.top[2])
		k0 = min(k0, k)
		k1 = max(k1, k+sm.next[2])
	}
	return k0, k1, k1 >= 0
}

// sampleRow sets out[n] to the trilinear value at pos[n] µm, rounded, or to
// 0 where ok[n] is false or pos[n] lies outside the stack, and counts the
// pixels outside and those not ok.
func (sm *sampler) sampleRow(out []uint16, pos []transform.Vec, ok []bool) (outside, failed int) {
	pages := sm.pages
	ix, iy, iz := sm.inv[0], sm.inv[1], sm.inv[2]
	ox, oy, oz := sm.origin[0], sm.origin[1], sm.origin[2]
	hx, hy, hz := sm.hi[0], sm.hi[1], sm.hi[2]
	tx, ty, tz := sm.top[0], sm.top[1], sm.top[2]
	nx, ny, nz := sm.next[0], sm.next[1], sm.next[2]
	sy := sm.stride[1]
	ok = ok[:len(pos)]
	out = out[:len(pos)]
	for n := range pos {
		if !ok[n] {
			out[n] = 0
			failed++
			continue
		}
		u, v, w := (pos[n][0]-ox)*ix, (pos[n][1]-oy)*iy, (pos[n][2]-oz)*iz
		// Written so that NaN falls outside too.
		if !(u >= -0.5 && u < hx && v >= -0.5 && v < hy && w >= -0.5 && w < hz) {
			out[n] = 0
			outside++
			continue
		}
		// Within the outer half voxel the edge voxel is extended.
		u, v, w = max(u, 0), max(v, 0), max(w, 0)
		i, j, k := min(int(u), tx), min(int(v), ty), min(int(w), tz)
		fu, fv, fw := min(u-float64(i), 1), min(v-float64(j), 1), min(w-float64(k), 1)
		at := i + j*sy
		p := pages[k]
		a00 := lerp(float64(p[at]), float64(p[at+nx]), fu)
		a01 := lerp(float64(p[at+ny]), float64(p[at+ny+nx]), fu)
		a := lerp(a00, a01, fv)
		if fw != 0 {
			p = pages[k+nz]
			b00 := lerp(float64(p[at]), float64(p[at+nx]), fu)
			b01 := lerp(float64(p[at+ny]), float64(p[at+ny+nx]), fu)
			a = lerp(a, lerp(b00, b01, fv), fw)
		}
		out[n] = uint16(a + 0.5)
	}
	return outside, failed
}

func lerp(a, b, t float64) float64 { return a + t*(b-a) }

// targetToSource maps an output (target) point back to where it is read in
// the source stack: through t's inverse, or through t itself when t maps
// target to source (inverse). The point is false where there is none.
func targetToSource(t transform.Transform, inverse bool) func(q transform.Vec) (transform.Vec, bool) {
	if inverse {
		return func(q transform.Vec) (transform.Vec, bool) {
			p := t.Apply(q)
			return p, p.IsFinite()
		}
	}
	return func(q transform.Vec) (transform.Vec, bool) {
		p, err := t.Invert(q)
		return p, err == nil && p.IsFinite()
	}
}
