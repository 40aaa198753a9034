package report

import (
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"

	"ferry/transform"
)

// Sizes of the page's figures (points; a CSS pixel is 0.75 pt).
const (
	maxFigureWidth = 740 // fits the page's 1000-pixel column
	stripGap       = 12  // between a plot and its legend strip
	panelGap       = 10  // between the panels of a projection figure
)

// insets is the room a plot's axes take around its data area.
type insets struct{ left, right, bottom, top vg.Length }

// measure finds the insets of p around a data area of w × h points. They
// depend on the tick labels and on the glyphs at the edges, both of which
// gonum/plot lays out relative to the canvas, so the measure is repeated
// until it settles.
func measure(p *plot.Plot, w, h vg.Length) insets {
	in := insets{left: 60, right: 12, bottom: 40, top: 8}
	for range 3 {
		c := draw.New(vgsvg.New(w+in.left+in.right, h+in.bottom+in.top))
		da := p.DataCanvas(c)
		in = insets{
			left: da.Min.X - c.Min.X, right: c.Max.X - da.Max.X,
			bottom: da.Min.Y - c.Min.Y, top: c.Max.Y - da.Max.Y,
		}
	}
	return in
}

// sub is the part r of canvas c.
func sub(c draw.Canvas, r vg.Rectangle) draw.Canvas {
	return draw.Canvas{Canvas: c.Canvas, Rectangle: r}
}

func rect(x0, y0, x1, y1 vg.Length) vg.Rectangle {
	return vg.Rectangle{Min: vg.Point{X: x0, Y: y0}, Max: vg.Point{X: x1, Y: y1}}
}

// fillWhite paints the whole canvas white: the page may be shown on any
// background, and the figures should look the same on all of them.
func fillWhite(c draw.Canvas) {
	c.SetColor(color.White)
	c.Fill(c.Rectangle.Path())
}

// field is an axis-aligned box of source space (µm).
type field struct{ lo, hi transform.Vec }

// boundsOf is the smallest box holding every point.
func boundsOf(dim int, sets ...[]transform.Vec) field {
	f := field{}
	for k := range 3 {
		f.lo[k], f.hi[k] = math.Inf(1), math.Inf(-1)
	}
	for _, pts := range sets {
		for _, p := range pts {
			for k := range dim {
				f.lo[k] = math.Min(f.lo[k], p[k])
				f.hi[k] = math.Max(f.hi[k], p[k])
			}
		}
	}
	for k := dim; k < 3; k++ {
		f.lo[k], f.hi[k] = 0, 0
	}
	return f
}

// largest is the largest extent of the box over the first dim axes.
func (f field) largest(dim int) float64 {
	m := 0.0
	for k := range dim {
		m = math.Max(m, f.hi[k]-f.lo[k])
	}
	return m
}

// padded widens the box by frac of its largest extent on every side, and
// every axis to at least minFrac of that extent, so that a thin slab of
// landmarks still gets a readable panel.
func (f field) padded(dim int, frac, minFrac float64) field {
	l := f.largest(dim)
	if l == 0 {
		l = 1
	}
	for k := range dim {
		if short := minFrac*l - (f.hi[k] - f.lo[k]); short > 0 {
			f.lo[k] -= short / 2
			f.hi[k] += short / 2
		}
		f.lo[k] -= frac * l
		f.hi[k] += frac * l
	}
	return f
}

func (f field) extent(k int) float64 { return f.hi[k] - f.lo[k] }

// thumb is a legend thumbnail drawn by a function.
type thumb func(c *draw.Canvas)

// Thumbnail implements plot.Thumbnailer.
func (t thumb) Thumbnail(c *draw.Canvas) { t(c) }

func glyphThumb(g draw.GlyphStyle) thumb {
	return func(c *draw.Canvas) { c.DrawGlyphNoClip(g, c.Center()) }
}

func lineThumb(sty draw.LineStyle) thumb {
	return func(c *draw.Canvas) {
		y := c.Center().Y
		c.StrokeLine2(sty, c.Min.X, y, c.Max.X, y)
	}
}

func boxThumb(fill color.Color) thumb {
	return func(c *draw.Canvas) {
		h := (c.Max.Y - c.Min.Y) * 0.35
		y := c.Center().Y
		c.FillPolygon(fill, []vg.Point{
			{X: c.Min.X, Y: y - h}, {X: c.Max.X, Y: y - h},
			{X: c.Max.X, Y: y + h}, {X: c.Min.X, Y: y + h},
		})
	}
}

// newLegend is a legend in the report's font, for a strip beside a plot.
func newLegend() plot.Legend {
	l := plot.NewLegend()
	l.TextStyle.Font = sans(legendSize)
	l.ThumbnailWidth = vg.Points(18)
	l.Padding = vg.Points(5)
	l.Top, l.Left = true, true
	return l
}

// legendSize is the width and height of legend l.
func legendExtent(l *plot.Legend) (w, h vg.Length) {
	c := draw.New(vgsvg.New(400, 400))
	r := l.Rectangle(c)
	return r.Max.X - r.Min.X, r.Max.Y - r.Min.Y
}

// niceLength is the largest of 1, 2 or 5 times a power of ten not above x,
// for a scale bar.
func niceLength(x float64) float64 {
	if !(x > 0) || math.IsInf(x, 0) {
		return 0
	}
	p := math.Pow(10, math.Floor(math.Log10(x)))
	for _, m := range []float64{5, 2, 1} {
		if m*p <= x*(1+1e-12) {
			return m * p
		}
	}
	return p
}

// formatLength writes a length in µm with as many decimals as its size
// needs.
func formatLength(x float64) string {
	switch {
	case x >= 10:
		return number(math.Round(x))
	case x >= 1:
		return number(math.Round(x*10) / 10)
	default:
		return number(math.Round(x*1000) / 1000)
	}
}

// verticalGrid is a light grid of vertical lines at the x ticks.
func verticalGrid() *plotter.Grid {
	g := plotter.NewGrid()
	g.Horizontal.Color = nil
	g.Vertical.Color = color.Gray{Y: 0xdd}
	g.Vertical.Width = 0.5
	return g
}

// lightGrid is a light grid at the ticks of both axes.
func lightGrid() *plotter.Grid {
	g := verticalGrid()
	g.Horizontal = g.Vertical
	return g
}

// shareTicks marks a share axis at every tenth, labelled at every fifth.
type shareTicks struct{}

// Ticks implements plot.Ticker.
func (shareTicks) Ticks(lo, hi float64) []plot.Tick {
	var t []plot.Tick
	for k := 0; k <= 10; k++ {
		v := float64(k) / 10
		if v < lo-1e-9 || v > hi+1e-9 {
			continue
		}
		label := ""
		if k%2 == 0 {
			label = number(v)
		}
		t = append(t, plot.Tick{Value: v, Label: label})
	}
	return t
}
