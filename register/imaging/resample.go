package imaging

import (
	"fmt"
	"math"
	"sync/atomic"

	"ferry/internal/parallel"
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

	mapPoint := func(q transform.Vec) (transform.Vec, bool) {
		p, err := t.Invert(q)
		return p, err == nil && p.IsFinite()
	}
	if opt.Inverse {
		mapPoint = func(q transform.Vec) (transform.Vec, bool) {
			p := t.Apply(q)
			return p, p.IsFinite()
		}
	}
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

// rootCell is the side, in pixels, of the cells the plane is first tiled
// with; a power of two so that every midpoint down to single pixels falls
// on a pixel.
const rootCell = 64

// field computes the sampling position of every pixel of a plane, exactly
// on an adaptive grid and bilinearly between (see ResampleWithReport).
type field struct {
	grid     Grid
	mapPoint func(transform.Vec) (transform.Vec, bool)
	check    float64 // the bound at the midpoints, µm
	exact    bool
}

// emitFunc receives the positions of pixels i0 … i0+len(pos)−1 of row j;
// ok[n] is false where the map failed. Calls for different rows or for
// different stretches of a row may run concurrently.
type emitFunc func(j, i0 int, pos []transform.Vec, ok []bool)

// position is the target-side position of pixel (i, j) of the plane, µm.
func (f *field) position(i, j int) transform.Vec {
	g := &f.grid
	return transform.Vec{g.Origin[0] + float64(i)*g.Voxel[0], g.Origin[1] + float64(j)*g.Voxel[1], g.Origin[2] + float64(g.Z)*g.Voxel[2]}
}

// run calls emit for every pixel of the plane, on all cores, and returns the
// number of exact evaluations of the map.
func (f *field) run(emit emitFunc) int {
	w, h := f.grid.Width, f.grid.Height
	if f.exact {
		return evaluations(parallel.Blocks(h, 1, func() *cell { return newCell(f, emit) }, func(c *cell, lo, hi int) {
			for j := lo; j < hi; j++ {
				c.exactRow(j)
			}
		}))
	}
	// The corners, edge midpoints and centres of all root cells form a
	// lattice of spacing rootCell/2, evaluated first so that neighbouring
	// root cells share the nodes on their common edges.
	across := (w + rootCell - 1) / rootCell
	down := (h + rootCell - 1) / rootCell
	lat := &lattice{width: 2*across + 1, height: 2*down + 1}
	lat.nodes = make([]transform.Vec, lat.width*lat.height)
	lat.ok = make([]bool, len(lat.nodes))
	parallel.Ranges(lat.height, 1, func(b0, b1 int) {
		for b := b0; b < b1; b++ {
			for a := range lat.width {
				n := b*lat.width + a
				lat.nodes[n], lat.ok[n] = f.mapPoint(f.position(a*rootCell/2, b*rootCell/2))
			}
		}
	})
	// Root cells differ in cost (a folded or steep one is refined deeper),
	// so they are handed out one by one.
	refined := evaluations(parallel.Blocks(across*down, 1, func() *cell { return newCell(f, emit) }, func(c *cell, lo, hi int) {
		for n := lo; n < hi; n++ {
			c.root(lat, n%across, n/across)
		}
	}))
	return len(lat.nodes) + refined
}

// lattice holds the exact map at every multiple of rootCell/2 pixels.
type lattice struct {
	width, height int
	nodes         []transform.Vec
	ok            []bool
}

// evaluations is the number of exact evaluations the workers' cells made.
func evaluations(cells []*cell) int {
	n := 0
	for _, c := range cells {
		n += c.evaluations
	}
	return n
}

// Node states in a cell's cache.
const (
	nodeUnknown uint8 = iota
	nodeOK
	nodeFailed
)

// cell is one worker's scratch space: the cache of exact evaluations at the
// (rootCell+1)² nodes of the root cell being refined, and row buffers.
type cell struct {
	f           *field
	emit        emitFunc
	x0, y0      int // the root cell's top-left pixel
	nodes       []transform.Vec
	state       []uint8
	pos         []transform.Vec
	ok          []bool
	evaluations int
}

func newCell(f *field, emit emitFunc) *cell {
	n := (rootCell + 1) * (rootCell + 1)
	width := rootCell
	if f.exact {
		width = f.grid.Width
	}
	return &cell{f: f, emit: emit, nodes: make([]transform.Vec, n), state: make([]uint8, n),
		pos: make([]transform.Vec, width), ok: make([]bool, width)}
}

// exactRow maps every pixel of row j exactly.
func (c *cell) exactRow(j int) {
	w := c.f.grid.Width
	for i := range w {
		c.pos[i], c.ok[i] = c.f.mapPoint(c.f.position(i, j))
	}
	c.evaluations += w
	c.emit(j, 0, c.pos[:w], c.ok[:w])
}

// root refines root cell (ra, rb), whose corners, edge midpoints and
// centre are taken from the lattice.
func (c *cell) root(lat *lattice, ra, rb int) {
	c.x0, c.y0 = ra*rootCell, rb*rootCell
	clear(c.state)
	for v := range 3 {
		for u := range 3 {
			l := (2*rb+v)*lat.width + 2*ra + u
			n := v*rootCell/2*(rootCell+1) + u*rootCell/2
			c.nodes[n] = lat.nodes[l]
			c.state[n] = nodeFailed
			if lat.ok[l] {
				c.state[n] = nodeOK
			}
		}
	}
	c.refine(0, 0, rootCell)
}

// node is the exact map at node (a, b) of the root cell, cached.
func (c *cell) node(a, b int) (transform.Vec, bool) {
	n := b*(rootCell+1) + a
	switch c.state[n] {
	case nodeOK:
		return c.nodes[n], true
	case nodeFailed:
		return transform.Vec{}, false
	}
	p, ok := c.f.mapPoint(c.f.position(c.x0+a, c.y0+b))
	c.evaluations++
	c.nodes[n] = p
	c.state[n] = nodeFailed
	if ok {
		c.state[n] = nodeOK
	}
	return p, ok
}

// refine handles the cell of side s pixels at node (a, b) of the root cell.
func (c *cell) refine(a, b, s int) {
	w, h := c.f.grid.Width, c.f.grid.Height
	if c.x0+a >= w || c.y0+b >= h {
		return // wholly outside the plane
	}
	if s == 1 {
		p, ok := c.node(a, b)
		c.pos[0], c.ok[0] = p, ok
		c.emit(c.y0+b, c.x0+a, c.pos[:1], c.ok[:1])
		return
	}
	m := s / 2
	var pts [3][3]transform.Vec
	good := 0
	for v := range 3 {
		for u := range 3 {
			p, ok := c.node(a+u*m, b+v*m)
			pts[v][u] = p
			if ok {
				good++
			}
		}
	}
	switch {
	case good == 0:
		c.fill(a, b, s, pts, false)
		return
	case good == 9 && c.fits(pts):
		c.fill(a, b, s, pts, true)
		return
	}
	c.refine(a, b, m)
	c.refine(a+m, b, m)
	c.refine(a, b+m, m)
	c.refine(a+m, b+m, m)
}

// fits reports whether the bilinear interpolant of the corners of pts
// matches the exact map at the edge midpoints and the centre.
func (c *cell) fits(pts [3][3]transform.Vec) bool {
	c00, c10, c01, c11 := pts[0][0], pts[0][2], pts[2][0], pts[2][2]
	mid := func(p, q transform.Vec) transform.Vec { return p.Add(q).Scale(0.5) }
	lim := c.f.check * c.f.check
	for _, d := range [5]transform.Vec{
		mid(c00, c10).Sub(pts[0][1]),
		mid(c01, c11).Sub(pts[2][1]),
		mid(c00, c01).Sub(pts[1][0]),
		mid(c10, c11).Sub(pts[1][2]),
		mid(mid(c00, c10), mid(c01, c11)).Sub(pts[1][1]),
	} {
		if !(d.Dot(d) <= lim) {
			return false
		}
	}
	return true
}

// fill emits the pixels of the cell of side s at node (a, b) that lie in
// the plane: interpolated bilinearly between the corners of pts when ok,
// failed otherwise.
func (c *cell) fill(a, b, s int, pts [3][3]transform.Vec, ok bool) {
	w, h := c.f.grid.Width, c.f.grid.Height
	cols := min(s, w-(c.x0+a))
	rows := min(s, h-(c.y0+b))
	c00, c10, c01, c11 := pts[0][0], pts[0][2], pts[2][0], pts[2][2]
	inv := 1 / float64(s)
	pos, good := c.pos[:cols], c.ok[:cols]
	for n := range good {
		good[n] = ok
	}
	for y := range rows {
		if ok {
			t := float64(y) * inv
			left := c00.Add(c01.Sub(c00).Scale(t))
			right := c10.Add(c11.Sub(c10).Scale(t))
			step := right.Sub(left).Scale(inv)
			for x := range pos {
				fx := float64(x)
				pos[x] = transform.Vec{left[0] + fx*step[0], left[1] + fx*step[1], left[2] + fx*step[2]}
			}
		}
		c.emit(c.y0+b+y, c.x0+a, pos, good)
	}
}
