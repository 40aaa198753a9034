package report

import (
	"errors"
	"html/template"
	"image"
	"image/color"
	"math"
	"sort"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/palette"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"ferry/register"
	"ferry/status"
	"ferry/transform"
)

const (
	// mapSamples is the number of grid points along the longer side of the
	// uncertainty map.
	mapSamples = 120
	// mapHeadroom: the colour scale ends this many times above the largest
	// r95 inside the landmarks' hull, so that the extrapolated margins do
	// not wash out the differences inside it.
	mapHeadroom  = 1.25
	maxMapHeight = 540
	// maxDrawnCells bounds the cells drawn on the map.
	maxDrawnCells = 5000
)

// uncertaintyGrid is r95 of a point mapped from each node of a grid over one
// plane of the source field.
type uncertaintyGrid struct {
	f      field
	z      float64 // the plane (3-D)
	nx, ny int
	// r95 and inside are row-major from the smallest y: node (i, j) is
	// index j·nx + i at (x_i, y_j). inside is false where the point is
	// extrapolated, outside the landmarks' hull.
	r95    []float64
	inside []bool
	// lo and hi are the ends of the colour scale; clipped says that some
	// nodes lie above hi.
	lo, hi  float64
	clipped bool
}

func (g *uncertaintyGrid) x(i int) float64 {
	return g.f.lo[0] + (float64(i)+0.5)*g.f.extent(0)/float64(g.nx)
}

func (g *uncertaintyGrid) y(j int) float64 {
	return g.f.lo[1] + (float64(j)+0.5)*g.f.extent(1)/float64(g.ny)
}

// newUncertaintyGrid maps every node of the plane z of f with m.
func newUncertaintyGrid(m *register.Mapper, f field, z float64) *uncertaintyGrid {
	g := &uncertaintyGrid{f: f, z: z}
	ex, ey := f.extent(0), f.extent(1)
	if ex >= ey {
		g.nx, g.ny = mapSamples, max(8, int(math.Round(mapSamples*ey/ex)))
	} else {
		g.nx, g.ny = max(8, int(math.Round(mapSamples*ex/ey))), mapSamples
	}
	pts := make([]transform.Vec, 0, g.nx*g.ny)
	for j := range g.ny {
		for i := range g.nx {
			pts = append(pts, transform.Vec{g.x(i), g.y(j), z})
		}
	}
	mapped := m.MapAll(pts, nil, false)
	g.r95 = make([]float64, len(mapped))
	g.inside = make([]bool, len(mapped))
	lo, hiAll, hiIn := math.Inf(1), 0.0, 0.0
	for k, mp := range mapped {
		g.r95[k] = mp.R95
		g.inside[k] = mp.Status != status.Extrapolated
		if math.IsNaN(mp.R95) || math.IsInf(mp.R95, 0) {
			continue
		}
		lo, hiAll = math.Min(lo, mp.R95), math.Max(hiAll, mp.R95)
		if g.inside[k] {
			hiIn = math.Max(hiIn, mp.R95)
		}
	}
	g.lo, g.hi = lo, hiAll
	if hiIn > 0 && hiIn*mapHeadroom < hiAll {
		g.hi, g.clipped = hiIn*mapHeadroom, true
	}
	if !(g.hi-g.lo > 1e-9*math.Max(g.hi, 1)) {
		// One value everywhere (a translation's uncertainty does not
		// depend on the position): give the scale a little width.
		g.hi = g.lo + math.Max(0.05*g.lo, 1e-6)
	}
	return g
}

// rampColours are the colour scale's stops from large to small r95: the
// palette's blue and sky blue, then white, rising in lightness (which the
// interpolation in CIELAB needs), so that the map reads the same in grey.
func rampColours() []color.Color { return []color.Color{blue, skyBlue, white} }

// newRamp is the colour scale from white at lo to blue at hi.
func newRamp(lo, hi float64) (palette.ColorMap, error) {
	cm, err := moreland.NewLuminance(rampColours())
	if err != nil {
		return nil, err
	}
	cm = palette.Reverse(cm)
	cm.SetMin(lo)
	cm.SetMax(hi)
	return cm, nil
}

func rampAt(cm palette.ColorMap, v float64) color.Color {
	v = math.Min(math.Max(v, cm.Min()), cm.Max())
	c, err := cm.At(v)
	if err != nil {
		return color.Transparent
	}
	return c
}

// image is the grid as a picture, its top row at the smallest y, which is
// where the map's downward y axis puts it.
func (g *uncertaintyGrid) image(cm palette.ColorMap) *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, g.nx, g.ny))
	for j := range g.ny {
		for i := range g.nx {
			v := g.r95[j*g.nx+i]
			if math.IsNaN(v) || math.IsInf(v, 0) {
				continue
			}
			img.Set(i, j, rampAt(cm, v))
		}
	}
	return img
}

// hullEdge traces where inside changes between neighbouring nodes by
// marching squares (Lorensen & Cline 1987, "Marching cubes", SIGGRAPH, in
// its two-dimensional form), the crossing taken halfway between the nodes.
func (g *uncertaintyGrid) hullEdge() [][2]plotterXY {
	var segs [][2]plotterXY
	in := func(i, j int) int {
		if g.inside[j*g.nx+i] {
			return 1
		}
		return 0
	}
	for j := 0; j+1 < g.ny; j++ {
		for i := 0; i+1 < g.nx; i++ {
			code := in(i, j) | in(i+1, j)<<1 | in(i+1, j+1)<<2 | in(i, j+1)<<3
			xm, ym := (g.x(i)+g.x(i+1))/2, (g.y(j)+g.y(j+1))/2
			bottom := plotterXY{xm, g.y(j)}
			right := plotterXY{g.x(i + 1), ym}
			top := plotterXY{xm, g.y(j + 1)}
			left := plotterXY{g.x(i), ym}
			switch code {
			case 1, 14:
				segs = append(segs, [2]plotterXY{left, bottom})
			case 2, 13:
				segs = append(segs, [2]plotterXY{bottom, right})
			case 3, 12:
				segs = append(segs, [2]plotterXY{left, right})
			case 4, 11:
				segs = append(segs, [2]plotterXY{right, top})
			case 5:
				segs = append(segs, [2]plotterXY{left, top}, [2]plotterXY{bottom, right})
			case 6, 9:
				segs = append(segs, [2]plotterXY{bottom, top})
			case 7, 8:
				segs = append(segs, [2]plotterXY{left, top})
			case 10:
				segs = append(segs, [2]plotterXY{left, bottom}, [2]plotterXY{right, top})
			}
		}
	}
	return segs
}

// placedCell is a mapped cell carried back to the source.
type placedCell struct {
	source transform.Vec
	status status.Status
}

// placeCells carries the mapped cells back into the source through the
// transform's inverse, to draw them on the source field. It returns the
// cells placed and how many could not be (no position, or no inverse).
//
// Past maxDrawnCells only every k-th cell is drawn (k the smallest that
// brings them under it), so that a table of a million cells makes a page a
// browser can open; stride says which k.
func placeCells(cells []register.MappedCell, tr transform.Transform) (placed []placedCell, missing, stride int) {
	stride = max(1, (len(cells)+maxDrawnCells-1)/maxDrawnCells)
	var out []placedCell
	for i, c := range cells {
		if !c.Placed {
			missing++
			continue
		}
		if i%stride != 0 {
			continue
		}
		x, err := tr.Invert(c.Target)
		if err != nil || !x.IsFinite() {
			missing++
			continue
		}
		out = append(out, placedCell{source: x, status: c.Status})
	}
	return out, missing, stride
}

// mapResult is the drawing of the uncertainty map, with what its caption
// needs.
type mapResult struct {
	svg           template.HTML
	grid          *uncertaintyGrid
	cellsPlaced   int
	cellsMissing  int
	cellStride    int
	flaggedOnMap  int
	statusesShown []string
}

// uncertaintyFigure draws r95 over the plane z of the field with the
// landmarks and the cells on it.
func uncertaintyFigure(ck *register.CheckJSON, source []transform.Vec, m *register.Mapper, tr transform.Transform, cells []register.MappedCell) (mapResult, error) {
	var res mapResult
	if m == nil || tr == nil {
		return res, errors.New("no transform")
	}
	dim := ck.Dim
	placed, missing, stride := placeCells(cells, tr)
	res.cellsPlaced, res.cellsMissing, res.cellStride = len(placed), missing, stride
	cellPts := make([]transform.Vec, len(placed))
	for i, c := range placed {
		cellPts[i] = c.source
	}
	f := boundsOf(dim, source, cellPts).padded(dim, 0.05, 0.2)
	z := 0.0
	if dim == 3 {
		z = planeDepth(source, cellPts)
	}
	g := newUncertaintyGrid(m, f, z)
	res.grid = g
	cm, err := newRamp(g.lo, g.hi)
	if err != nil {
		return res, err
	}

	var good, bad []transform.Vec
	for i, l := range ck.Landmarks {
		if l.Flag != "" {
			bad = append(bad, source[i])
		} else {
			good = append(good, source[i])
		}
	}
	res.flaggedOnMap = len(bad)
	edge := draw.LineStyle{Color: colourReference, Width: 1.3, Dashes: []vg.Length{5, 3}}
	goodStyle := glyph(upShape, colourMapLandmark, white, 4.4)
	badStyle := glyph(upShape, colourFlagged, white, 5.2)
	plotters := []plot.Plotter{
		rasterPlot{img: g.image(cm), x0: f.lo[0], x1: f.hi[0], y0: f.lo[1], y1: f.hi[1]},
		linePlot{lines: chain(g.hullEdge()), style: edge},
	}
	legend := newLegend()
	legend.Add("edge of the landmarks' hull", lineThumb(edge))
	// Cells go under the landmarks, which are fewer and matter more here.
	byStatus := map[status.Status][]transform.Vec{}
	for _, c := range placed {
		byStatus[styleFor(c.status).status] = append(byStatus[styleFor(c.status).status], c.source)
	}
	for _, st := range cellStyles() {
		pts := byStatus[st.status]
		if len(pts) == 0 {
			continue
		}
		sty := glyph(st.shape, st.fill, black, 2.8)
		plotters = append(plotters, pointPlot{pts: pts, style: sty})
		legend.Add(st.label, glyphThumb(sty))
		res.statusesShown = append(res.statusesShown, st.label)
	}
	plotters = append(plotters, pointPlot{pts: good, style: goodStyle})
	legend.Add("landmark", glyphThumb(goodStyle))
	if len(bad) > 0 {
		plotters = append(plotters, pointPlot{pts: bad, style: badStyle})
		legend.Add("flagged landmark", glyphThumb(badStyle))
	}
	pn := newProjection(f, 0, 1, plotters...)
	lw, lh := legendExtent(&legend)
	lw = vg.Length(math.Max(float64(lw), 120))
	const barH, barBlock = 150, 190
	lay := layoutOrtho(f, 2, []*projection{pn}, lw, lh+barBlock+10, maxMapHeight)
	label := "Predicted 95 % radius r95 over the imaged field"
	res.svg, err = figureSVG(lay.w, lay.h, label, func(c draw.Canvas) error {
		fillWhite(c)
		pn.p.Draw(sub(c, lay.rects[0]))
		lc := sub(c, lay.legend)
		colourBar(c, cm, lc.Min.X+2, lc.Max.Y-24, barH, g.clipped)
		legend.Draw(sub(c, rect(lc.Min.X, lc.Min.Y, lc.Max.X, lc.Max.Y-barBlock)))
		return nil
	})
	return res, err
}

// styleFor is the drawing style of a cell status.
func styleFor(st status.Status) cellStyle {
	styles := cellStyles()
	for _, s := range styles {
		if s.status == st {
			return s
		}
	}
	return styles[len(styles)-1]
}

// planeDepth is the depth of the map: the median depth of the cells, where
// they are, or the middle of the landmarks' depths without cells.
func planeDepth(source, cells []transform.Vec) float64 {
	if len(cells) > 0 {
		z := make([]float64, len(cells))
		for i, c := range cells {
			z[i] = c[2]
		}
		sort.Float64s(z)
		if len(z)%2 == 1 {
			return z[len(z)/2]
		}
		return (z[len(z)/2-1] + z[len(z)/2]) / 2
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, s := range source {
		lo, hi = math.Min(lo, s[2]), math.Max(hi, s[2])
	}
	return (lo + hi) / 2
}
