// The plot elements of the uncertainty map (raster, chained hull lines,
// points) and its colour bar.

package report

import (
	"image"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/palette"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"ferry/transform"
)

type plotterXY struct{ x, y float64 }

// rasterPlot draws an image over the data box [x0, x1] × [y0, y1], its
// top row at y0.
type rasterPlot struct {
	img            *image.NRGBA
	x0, x1, y0, y1 float64
}

func (r rasterPlot) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	ax, bx := trX(r.x0), trX(r.x1)
	ay, by := trY(r.y0), trY(r.y1)
	img := image.Image(r.img)
	if ay < by {
		// The y axis grows upwards here: turn the picture over.
		flipped := image.NewNRGBA(r.img.Rect)
		h := r.img.Rect.Dy()
		for j := range h {
			copy(flipped.Pix[j*flipped.Stride:(j+1)*flipped.Stride], r.img.Pix[(h-1-j)*r.img.Stride:(h-j)*r.img.Stride])
		}
		img = flipped
	}
	c.DrawImage(vg.Rectangle{
		Min: vg.Point{X: min(ax, bx), Y: min(ay, by)},
		Max: vg.Point{X: max(ax, bx), Y: max(ay, by)},
	}, img)
}

// chain joins segments that share an end into polylines, so that a dashed
// line runs on across the grid instead of starting its dash afresh in every
// cell. Marching squares makes the shared ends bit for bit equal.
func chain(segs [][2]plotterXY) [][]plotterXY {
	ends := map[plotterXY][]int{}
	for k, s := range segs {
		ends[s[0]] = append(ends[s[0]], k)
		ends[s[1]] = append(ends[s[1]], k)
	}
	used := make([]bool, len(segs))
	next := func(at plotterXY) (int, bool) {
		for _, k := range ends[at] {
			if !used[k] {
				return k, true
			}
		}
		return 0, false
	}
	// extend walks on from the last point of line while an unused segment
	// starts or ends there.
	extend := func(line []plotterXY) []plotterXY {
		for {
			at := line[len(line)-1]
			k, ok := next(at)
			if !ok {
				return line
			}
			used[k] = true
			if segs[k][0] == at {
				line = append(line, segs[k][1])
			} else {
				line = append(line, segs[k][0])
			}
		}
	}
	var lines [][]plotterXY
	for k, s := range segs {
		if used[k] {
			continue
		}
		used[k] = true
		forward := extend([]plotterXY{s[0], s[1]})
		// Walk the other way from the first point too, then join.
		backward := extend([]plotterXY{s[0]})
		line := make([]plotterXY, 0, len(forward)+len(backward)-1)
		for i := len(backward) - 1; i > 0; i-- {
			line = append(line, backward[i])
		}
		lines = append(lines, append(line, forward...))
	}
	return lines
}

// linePlot draws polylines in data coordinates.
type linePlot struct {
	lines [][]plotterXY
	style draw.LineStyle
}

func (l linePlot) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	for _, line := range l.lines {
		pts := make([]vg.Point, len(line))
		for i, q := range line {
			pts[i] = vg.Point{X: trX(q.x), Y: trY(q.y)}
		}
		c.StrokeLines(l.style, pts)
	}
}

// pointPlot draws a marker at each point, on the axes a and b.
type pointPlot struct {
	pts   []transform.Vec
	style draw.GlyphStyle
}

func (pp pointPlot) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	for _, q := range pp.pts {
		c.DrawGlyph(pp.style, vg.Point{X: trX(q[0]), Y: trY(q[1])})
	}
}

// colourBar draws the colour scale upright with its top at (x, top), its
// ticks and its name.
func colourBar(c draw.Canvas, cm palette.ColorMap, x, top, height vg.Length, clipped bool) {
	const width = 14
	// The picture is some pixels wide: a browser smooths a one-pixel
	// column scaled up into a faint line.
	const steps, across = 128, 8
	img := image.NewNRGBA(image.Rect(0, 0, across, steps))
	for k := range steps {
		v := cm.Max() - (cm.Max()-cm.Min())*(float64(k)+0.5)/steps
		for i := range across {
			img.Set(i, k, rampAt(cm, v))
		}
	}
	bottom := top - height
	c.DrawImage(rect(x, bottom, x+width, top), img)
	c.SetLineStyle(draw.LineStyle{Color: colourReference, Width: 0.6})
	var frame vg.Path
	frame.Move(vg.Point{X: x, Y: bottom})
	frame.Line(vg.Point{X: x + width, Y: bottom})
	frame.Line(vg.Point{X: x + width, Y: top})
	frame.Line(vg.Point{X: x, Y: top})
	frame.Close()
	c.Stroke(frame)
	ts := text.Style{Color: colourReference, Font: sans(tickSize), Handler: plot.DefaultTextHandler,
		XAlign: draw.XLeft, YAlign: draw.YCenter}
	for _, t := range (plot.DefaultTicks{}).Ticks(cm.Min(), cm.Max()) {
		if t.Label == "" || t.Value < cm.Min() || t.Value > cm.Max() {
			continue
		}
		y := bottom + height*vg.Length((t.Value-cm.Min())/(cm.Max()-cm.Min()))
		if clipped && top-y < 16 {
			continue // the top is labelled "≥"
		}
		c.StrokeLine2(draw.LineStyle{Color: colourReference, Width: 0.6}, x+width, y, x+width+4, y)
		c.FillText(ts, vg.Point{X: x + width + 6, Y: y}, t.Label)
	}
	if clipped {
		// The top colour stands for everything above the scale.
		c.FillText(ts, vg.Point{X: x + width + 6, Y: top}, "≥ "+formatLength(cm.Max()))
	}
	name := ts
	name.XAlign, name.YAlign = draw.XLeft, draw.YBottom
	name.Font = sans(legendSize)
	c.FillText(name, vg.Point{X: x, Y: top + 8}, "r95 (µm)")
}
