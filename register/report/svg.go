package report

import (
	"bytes"
	"fmt"
	"html/template"
	"math"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Text sizes (points). The figures are drawn at the size they are shown,
// so these are the sizes the reader sees.
const (
	labelSize  = 11
	tickSize   = 10
	legendSize = 10
	noteSize   = 9
)

// sans is the typeface of every figure. Its metrics come with gonum/plot;
// the page asks the browser for the same face or a metric-compatible one.
func sans(size vg.Length) font.Font {
	return font.Font{Typeface: "Liberation", Variant: "Sans", Size: size}
}

// newPlot is a plot without a title (the page gives each figure a heading),
// with the report's fonts and axis labels.
func newPlot(xLabel, yLabel string) *plot.Plot {
	p := plot.New()
	p.X.Label.Text, p.Y.Label.Text = xLabel, yLabel
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Label.TextStyle.Font = sans(labelSize)
		a.Tick.Label.Font = sans(tickSize)
		a.Label.Padding = vg.Points(4)
	}
	p.Legend.TextStyle.Font = sans(legendSize)
	p.Legend.ThumbnailWidth = vg.Points(18)
	p.Legend.Top = true
	p.Legend.Left = true
	return p
}

// figureSVG draws a figure of w × h points with draw and returns it as an
// <svg> element for inline use in HTML5. gonum/plot can panic on degenerate
// input (an empty range, say); that is turned into an error rather than
// taking the program down.
func figureSVG(w, h vg.Length, label string, paint func(c draw.Canvas) error) (svg template.HTML, err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("drawing %s: %v", label, r)
		}
	}()
	c := vgsvg.New(w, h)
	if err := paint(draw.New(c)); err != nil {
		return "", err
	}
	var buf bytes.Buffer
	if _, err := c.WriteTo(&buf); err != nil {
		return "", fmt.Errorf("drawing %s: %w", label, err)
	}
	return inlineSVG(buf.String(), w, h, label)
}

// inlineSVG turns the stand-alone SVG document of vgsvg into an element for
// an HTML page: without the XML prolog and the namespace declarations
// (HTML5 puts <svg> in the SVG namespace by itself, and the page must name
// no URL at all), with the accessible label, the image links in the SVG 2
// spelling, the embedded images labelled as the PNG they are, and the font
// asked for by name with metric-compatible fallbacks.
func inlineSVG(doc string, w, h vg.Length, label string) (template.HTML, error) {
	start := strings.Index(doc, "<svg")
	if start < 0 {
		return "", fmt.Errorf("drawing %s: no <svg> element in the output", label)
	}
	end := strings.IndexByte(doc[start:], '>')
	if end < 0 {
		return "", fmt.Errorf("drawing %s: the <svg> element is not closed", label)
	}
	body := doc[start+end+1:]
	body = strings.ReplaceAll(body, "xlink:href=", "href=")
	body = strings.ReplaceAll(body, "data:image/jpg;base64,", "data:image/png;base64,")
	body = strings.ReplaceAll(body, "font-family:Liberation Sans;", "font-family:'Liberation Sans',Arimo,Arial,Helvetica,sans-serif;")
	open := fmt.Sprintf(`<svg class="fig" width="%s" height="%s" viewBox="0 0 %s %s" role="img" aria-label="%s">`,
		points(w), points(h), number(w.Points()), number(h.Points()), template.HTMLEscapeString(label))
	return template.HTML(open + strings.TrimRight(body, "\n")), nil
}

func points(l vg.Length) string { return number(l.Points()) + "pt" }

// number formats x with at most three decimals and no trailing zeros.
func number(x float64) string {
	s := fmt.Sprintf("%.3f", x)
	s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	if s == "-0" {
		return "0"
	}
	return s
}

// shape is a marker outline; every marker is filled with its colour and
// edged, so that it stays visible on a coloured map and is told apart by its
// shape as well as its colour.
type shape int

const (
	circleShape shape = iota
	squareShape
	diamondShape
	upShape    // triangle pointing up
	downShape  // triangle pointing down
	rightShape // triangle pointing right, for a value beyond the axis
	crossShape
)

// marker is a draw.GlyphDrawer: a filled shape with an edge.
type marker struct {
	shape shape
	edge  swatch
	// edgeWidth is the width of the edge (points); 0 draws none.
	edgeWidth vg.Length
}

// DrawGlyph implements draw.GlyphDrawer.
func (m marker) DrawGlyph(c *draw.Canvas, sty draw.GlyphStyle, pt vg.Point) {
	r := sty.Radius
	if m.shape == crossShape {
		// A cross has no inside: draw it thick in the edge colour, then
		// thinner in its own.
		arms := [][]vg.Point{
			{{X: pt.X - r, Y: pt.Y - r}, {X: pt.X + r, Y: pt.Y + r}},
			{{X: pt.X - r, Y: pt.Y + r}, {X: pt.X + r, Y: pt.Y - r}},
		}
		for _, arm := range arms {
			if m.edgeWidth > 0 {
				c.StrokeLines(draw.LineStyle{Color: m.edge, Width: r/2 + 2*m.edgeWidth}, arm)
			}
		}
		for _, arm := range arms {
			c.StrokeLines(draw.LineStyle{Color: sty.Color, Width: r / 2}, arm)
		}
		return
	}
	var outline vg.Path
	switch m.shape {
	case circleShape:
		outline.Move(vg.Point{X: pt.X + r, Y: pt.Y})
		outline.Arc(pt, r, 0, 2*math.Pi)
	case squareShape:
		s := r * 0.85
		outline.Move(vg.Point{X: pt.X - s, Y: pt.Y - s})
		outline.Line(vg.Point{X: pt.X + s, Y: pt.Y - s})
		outline.Line(vg.Point{X: pt.X + s, Y: pt.Y + s})
		outline.Line(vg.Point{X: pt.X - s, Y: pt.Y + s})
	case diamondShape:
		s := r * 1.2
		outline.Move(vg.Point{X: pt.X, Y: pt.Y - s})
		outline.Line(vg.Point{X: pt.X + s, Y: pt.Y})
		outline.Line(vg.Point{X: pt.X, Y: pt.Y + s})
		outline.Line(vg.Point{X: pt.X - s, Y: pt.Y})
	case upShape, downShape:
		s := r * 1.25
		dir := vg.Length(1)
		if m.shape == downShape {
			dir = -1
		}
		outline.Move(vg.Point{X: pt.X, Y: pt.Y + dir*s})
		outline.Line(vg.Point{X: pt.X + s*0.866, Y: pt.Y - dir*s*0.5})
		outline.Line(vg.Point{X: pt.X - s*0.866, Y: pt.Y - dir*s*0.5})
	case rightShape:
		s := r * 1.25
		outline.Move(vg.Point{X: pt.X + s, Y: pt.Y})
		outline.Line(vg.Point{X: pt.X - s*0.5, Y: pt.Y + s*0.866})
		outline.Line(vg.Point{X: pt.X - s*0.5, Y: pt.Y - s*0.866})
	}
	outline.Close()
	c.SetColor(sty.Color)
	c.Fill(outline)
	if m.edgeWidth > 0 {
		c.SetLineStyle(draw.LineStyle{Color: m.edge, Width: m.edgeWidth})
		c.Stroke(outline)
	}
}

// glyph is the style of a marker of shape and colour fill with a thin edge
// of colour edge.
func glyph(s shape, fill, edge swatch, radius vg.Length) draw.GlyphStyle {
	return draw.GlyphStyle{Color: fill, Radius: radius, Shape: marker{shape: s, edge: edge, edgeWidth: 0.6}}
}
