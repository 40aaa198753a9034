// The adaptive grid on which resampling maps positions exactly, and the
// bilinear fill between its nodes.

package imaging

import (
	"ferry/internal/parallel"
	"ferry/transform"
)

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
