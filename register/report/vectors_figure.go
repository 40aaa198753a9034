package report

import (
	"errors"
	"html/template"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"ferry/register"
	"ferry/transform"
)

const (
	// arrowShare is the length, as a share of the field's largest extent,
	// of the longest arrow of a landmark that passed the check.
	arrowShare = 0.12
	// arrowCap is the longest an arrow is drawn, as a share of the field's
	// largest extent; a flagged landmark's error can be far larger than the
	// others' and is then drawn shortened, dashed.
	arrowCap = 0.3
	// scaleBarPoints is about the longest a scale bar is drawn.
	scaleBarPoints = 80
	// maxFigureHeight bounds the height of the projections.
	maxFigureHeight = 820
)

// arrow is one landmark's leave-one-out error drawn from its source
// position.
type arrow struct {
	id        string
	base, tip transform.Vec
	flagged   bool
	shortened bool
}

// vectors is the drawing of the leave-one-out errors.
type vectors struct {
	arrows []arrow
	// scale is how many times its true length an arrow is drawn; bar is the
	// length of error (µm) that the scale bar stands for.
	scale, bar float64
	shortened  int
	// skipped counts the landmarks where the transform has no inverse
	// Jacobian to carry the error back to the source.
	skipped int
}

// sourceErrors carries each landmark's leave-one-out error, a target-space
// vector, back into the source volume through the inverse Jacobian of the
// transform at the landmark, J⁻¹·e to first order, so that the arrows point
// where the landmark is off in the volume the user picked it in (mirrors,
// rotations and shrinkage undone).
func sourceErrors(ck *register.CheckJSON, source []transform.Vec, tr transform.Transform) ([]transform.Vec, []bool) {
	out := make([]transform.Vec, len(ck.Landmarks))
	ok := make([]bool, len(ck.Landmarks))
	for i, l := range ck.Landmarks {
		var e transform.Vec
		copy(e[:], l.LOOUM)
		jac := tr.Jacobian(source[i])
		if ck.Dim == 2 {
			jac[0][2], jac[1][2], jac[2][0], jac[2][1], jac[2][2] = 0, 0, 0, 0, 1
			e[2] = 0
		}
		inv, invertible := jac.Inverse()
		if !invertible {
			continue
		}
		out[i], ok[i] = inv.MulVec(e), true
	}
	return out, ok
}

func newVectors(ck *register.CheckJSON, source []transform.Vec, tr transform.Transform, span float64) vectors {
	errs, ok := sourceErrors(ck, source, tr)
	longest, longestAll := 0.0, 0.0
	for i, e := range errs {
		if !ok[i] {
			continue
		}
		longestAll = math.Max(longestAll, e.Norm())
		if ck.Landmarks[i].Flag == "" {
			longest = math.Max(longest, e.Norm())
		}
	}
	if longest == 0 {
		longest = longestAll
	}
	v := vectors{scale: 1}
	if longest > 0 {
		v.scale = arrowShare * span / longest
		v.bar = niceLength(longest * 0.6)
	}
	for i, e := range errs {
		if !ok[i] {
			v.skipped++
			continue
		}
		a := arrow{id: ck.Landmarks[i].ID, base: source[i], flagged: ck.Landmarks[i].Flag != ""}
		d := e.Scale(v.scale)
		if n := d.Norm(); n > arrowCap*span {
			d = d.Scale(arrowCap * span / n)
			a.shortened = true
			v.shortened++
		}
		a.tip = source[i].Add(d)
		v.arrows = append(v.arrows, a)
	}
	return v
}

// arrowPlot draws the arrows in the projection on axes a (across) and b
// (up the page), the flagged ones last so that they stay on top.
type arrowPlot struct {
	arrows []arrow
	a, b   int
}

func (ap arrowPlot) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	label := text.Style{Color: colourReference, Font: sans(noteSize), Handler: p.TextHandler,
		XAlign: draw.XLeft, YAlign: draw.YBottom}
	for _, flagged := range []bool{false, true} {
		for _, ar := range ap.arrows {
			if ar.flagged != flagged {
				continue
			}
			from := vg.Point{X: trX(ar.base[ap.a]), Y: trY(ar.base[ap.b])}
			to := vg.Point{X: trX(ar.tip[ap.a]), Y: trY(ar.tip[ap.b])}
			col := colourLandmark
			if flagged {
				col = colourFlagged
			}
			drawArrow(&c, from, to, col, ar.shortened)
			if flagged {
				c.FillText(label, vg.Point{X: from.X + 4, Y: from.Y + 3}, shorten(ar.id, maxLabelRunes))
			}
		}
	}
}

// drawArrow draws a stem from a dot at from to a head at to.
func drawArrow(c *draw.Canvas, from, to vg.Point, col swatch, dashed bool) {
	c.DrawGlyphNoClip(draw.GlyphStyle{Color: col, Radius: 1.9, Shape: draw.CircleGlyph{}}, from)
	dx, dy := float64(to.X-from.X), float64(to.Y-from.Y)
	l := math.Hypot(dx, dy)
	if l < 1 {
		return
	}
	ux, uy := dx/l, dy/l
	head := math.Min(6.5, 0.5*l)
	half := head * 0.45
	neck := vg.Point{X: to.X - vg.Length(ux*head*0.8), Y: to.Y - vg.Length(uy*head*0.8)}
	sty := draw.LineStyle{Color: col, Width: 1.4}
	if dashed {
		sty.Dashes = []vg.Length{3.5, 2.5}
	}
	c.StrokeLines(sty, []vg.Point{from, neck})
	back := vg.Point{X: to.X - vg.Length(ux*head), Y: to.Y - vg.Length(uy*head)}
	c.FillPolygon(col, []vg.Point{
		to,
		{X: back.X - vg.Length(uy*half), Y: back.Y + vg.Length(ux*half)},
		{X: back.X + vg.Length(uy*half), Y: back.Y - vg.Length(ux*half)},
	})
}

func arrowThumb(col swatch, dashed bool) thumb {
	return func(c *draw.Canvas) {
		y := c.Center().Y
		drawArrow(c, vg.Point{X: c.Min.X + 2, Y: y}, vg.Point{X: c.Max.X, Y: y}, col, dashed)
	}
}

// projection is one panel: axes a across and b up the page.
type projection struct {
	a, b int
	p    *plot.Plot
	in   insets
}

func axisName(k int) string { return [3]string{"x", "y", "z"}[k] }

// newProjection is a panel of the box f on axes a and b. The y and z axes
// grow downwards, as rows and slices do in an image stack.
func newProjection(f field, a, b int, plotters ...plot.Plotter) *projection {
	p := newPlot(axisName(a)+" (µm)", axisName(b)+" (µm)")
	p.X.Min, p.X.Max = f.lo[a], f.hi[a]
	p.Y.Min, p.Y.Max = f.lo[b], f.hi[b]
	p.Y.Scale = plot.InvertedScale{Normalizer: plot.LinearScale{}}
	p.Add(lightGrid())
	p.Add(plotters...)
	return &projection{a: a, b: b, p: p}
}

// orthoLayout places the panels at one scale (points per µm): xy at the top
// left, xz below it sharing x, zy to its right sharing y, as a microscope's
// orthogonal views; in 2-D the xy panel alone. The legend goes into the
// free corner when it fits there and into a strip at the right when not.
type orthoLayout struct {
	scale         float64 // points per µm
	w, h          vg.Length
	rects         []vg.Rectangle // one per panel
	legend        vg.Rectangle
	panels        []*projection
	left, right   vg.Length
	bottomRowH    vg.Length
	topDataBottom vg.Length
}

func layoutOrtho(f field, dim int, panels []*projection, legendW, legendH, maxH vg.Length) orthoLayout {
	ex, ey, ez := f.extent(0), f.extent(1), f.extent(2)
	// Measure the axes at a first guess of the scale, then at the scale
	// they allow, which changes them a little.
	scale := 1.0
	var lay orthoLayout
	for _, strip := range []bool{false, true} {
		if dim == 2 && !strip {
			continue
		}
		for range 3 {
			for _, pn := range panels {
				pn.in = measure(pn.p, vg.Length(scale*f.extent(pn.a)), vg.Length(scale*f.extent(pn.b)))
			}
			lay = place(f, dim, panels, scale, strip, legendW, legendH)
			var fixedW, fixedH, spanW, spanH float64
			if dim == 2 {
				fixedW, spanW = float64(lay.w)-scale*ex, ex
				fixedH, spanH = float64(lay.h)-scale*ey, ey
			} else {
				fixedW, spanW = float64(lay.w)-scale*(ex+ez), ex+ez
				fixedH, spanH = float64(lay.h)-scale*(ey+ez), ey+ez
			}
			scale = math.Min((maxFigureWidth-fixedW)/spanW, (float64(maxH)-fixedH)/spanH)
			if !(scale > 0) {
				scale = 0.1
			}
		}
		lay = place(f, dim, panels, scale, strip, legendW, legendH)
		if strip || lay.legend.Max.X-lay.legend.Min.X >= legendW && lay.legend.Max.Y-lay.legend.Min.Y >= legendH {
			return lay
		}
	}
	return lay
}

func place(f field, dim int, panels []*projection, scale float64, strip bool, legendW, legendH vg.Length) orthoLayout {
	lay := orthoLayout{scale: scale, panels: panels}
	size := func(k int) vg.Length { return vg.Length(scale * f.extent(k)) }
	xy := panels[0]
	if dim == 2 {
		pw := xy.in.left + size(0) + xy.in.right
		ph := xy.in.bottom + size(1) + xy.in.top
		lay.rects = []vg.Rectangle{rect(0, 0, pw, ph)}
		lay.legend = rect(pw+stripGap, 0, pw+stripGap+legendW, ph-xy.in.top)
		lay.w, lay.h = pw+stripGap+legendW, vg.Length(math.Max(float64(ph), float64(legendH)))
		return lay
	}
	xz, zy := panels[1], panels[2]
	x0 := vg.Length(math.Max(float64(xy.in.left), float64(xz.in.left)))
	leftW := x0 + size(0) + vg.Length(math.Max(float64(xy.in.right), float64(xz.in.right)))
	bottomH := xz.in.bottom + size(2) + xz.in.top
	y0 := bottomH + panelGap + vg.Length(math.Max(float64(xy.in.bottom), float64(zy.in.bottom)))
	top := y0 + size(1) + vg.Length(math.Max(float64(xy.in.top), float64(zy.in.top)))
	zx := leftW + panelGap
	rightW := zy.in.left + size(2) + zy.in.right
	lay.rects = []vg.Rectangle{
		rect(x0-xy.in.left, y0-xy.in.bottom, x0+size(0)+xy.in.right, y0+size(1)+xy.in.top),
		rect(x0-xz.in.left, 0, x0+size(0)+xz.in.right, bottomH),
		rect(zx, y0-zy.in.bottom, zx+rightW, y0+size(1)+zy.in.top),
	}
	lay.w, lay.h = zx+rightW, top
	if strip {
		lay.legend = rect(lay.w+stripGap, 0, lay.w+stripGap+legendW, top-xy.in.top)
		lay.w += stripGap + legendW
		if lay.h < legendH {
			lay.h = legendH
		}
	} else {
		lay.legend = rect(zx+zy.in.left, 0, lay.w, bottomH-xz.in.top)
	}
	return lay
}

// vectorsFigure draws the leave-one-out errors as arrows in the orthogonal
// projections of the source volume, all at one scale, with a scale bar.
func vectorsFigure(ck *register.CheckJSON, source []transform.Vec, tr transform.Transform) (template.HTML, vectors, error) {
	if tr == nil {
		return "", vectors{}, errors.New("no transform to carry the errors back to the source")
	}
	dim := ck.Dim
	bounds := boundsOf(dim, source)
	span := bounds.largest(dim)
	if !(span > 0) {
		return "", vectors{}, errors.New("the landmarks all lie at one point")
	}
	v := newVectors(ck, source, tr, span)
	var tips []transform.Vec
	for _, a := range v.arrows {
		tips = append(tips, a.tip)
	}
	f := boundsOf(dim, source, tips)
	f = field{lo: f.lo, hi: f.hi}.padded(dim, 0.04, 0.25)

	pairs := [][2]int{{0, 1}, {0, 2}, {2, 1}}
	if dim == 2 {
		pairs = pairs[:1]
	}
	var panels []*projection
	for _, ab := range pairs {
		panels = append(panels, newProjection(f, ab[0], ab[1], arrowPlot{arrows: v.arrows, a: ab[0], b: ab[1]}))
	}

	legend := newLegend()
	legend.Add("landmark and its error", arrowThumb(colourLandmark, false))
	anyFlagged := false
	for _, a := range v.arrows {
		anyFlagged = anyFlagged || a.flagged
	}
	if anyFlagged {
		legend.Add("flagged landmark", arrowThumb(colourFlagged, false))
	}
	if v.shortened > 0 {
		legend.Add("drawn shorter than scale", arrowThumb(colourFlagged, true))
	}
	lw, lh := legendExtent(&legend)
	lw = vg.Length(math.Max(float64(lw), 130))
	const barBlock = 44 // room for the scale bar under the legend
	lay := layoutOrtho(f, dim, panels, lw, lh+barBlock, maxFigureHeight)
	if v.bar > 0 {
		// A round length of error that is drawn long enough to read.
		v.bar = niceLength(scaleBarPoints / (v.scale * lay.scale))
	}
	label := "Leave-one-out errors as arrows in the projections of the source volume"
	svg, err := figureSVG(lay.w, lay.h, label, func(c draw.Canvas) error {
		fillWhite(c)
		for i, pn := range lay.panels {
			pn.p.Draw(sub(c, lay.rects[i]))
		}
		lc := sub(c, lay.legend)
		legend.Draw(lc)
		if v.bar > 0 {
			barLen := vg.Length(v.bar * v.scale * lay.scale)
			y := lc.Max.Y - lh - 26
			x := lc.Min.X + 2
			sty := draw.LineStyle{Color: colourReference, Width: 2}
			c.StrokeLine2(sty, x, y, x+barLen, y)
			c.StrokeLine2(draw.LineStyle{Color: colourReference, Width: 1}, x, y-4, x, y+4)
			c.StrokeLine2(draw.LineStyle{Color: colourReference, Width: 1}, x+barLen, y-4, x+barLen, y+4)
			ts := text.Style{Color: colourReference, Font: sans(legendSize), Handler: plot.DefaultTextHandler,
				XAlign: draw.XLeft, YAlign: draw.YTop}
			c.FillText(ts, vg.Point{X: x, Y: y - 7}, formatLength(v.bar)+" µm of error")
		}
		return nil
	})
	return svg, v, err
}
