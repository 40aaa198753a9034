package report

import (
	"html/template"
	"math"
	"sort"
	"strings"
	"unicode/utf8"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"ferry/register"
)

const (
	// rowHeight is the height of one landmark's row in the error figure
	// (points); past maxNamedRows the rows share maxRowsHeight.
	rowHeight     = 13
	maxRowsHeight = maxNamedRows * rowHeight
	// maxNamedRows is the most landmarks the error figure names one by one;
	// past it the rows are numbered by rank.
	maxNamedRows = 120
	// maxLabelRunes shortens long ids and reasons in figures; the tables
	// give them whole.
	maxLabelRunes = 22
	// offScale: the error axis ends at this many times the largest error of
	// a landmark that passed (or radius) when a flagged error lies beyond.
	offScale = 1.6
)

// byError is the order of the landmarks from the largest leave-one-out
// error to the smallest, ties by id, so that the figure does not depend on
// the order of the file beyond what the numbers say.
func byError(ls []register.LandmarkJSON) []int {
	order := make([]int, len(ls))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool {
		la, lb := ls[order[a]], ls[order[b]]
		if la.LOOErrorUM != lb.LOOErrorUM {
			return la.LOOErrorUM > lb.LOOErrorUM
		}
		return la.ID < lb.ID
	})
	return order
}

// shorten cuts s to n runes with an ellipsis.
func shorten(s string, n int) string {
	if utf8.RuneCountInString(s) <= n {
		return s
	}
	r := []rune(s)
	return string(r[:n-1]) + "…"
}

// flagHint is the short guess at the end of a flag's reason ("a wrong
// section?"), for a label in a figure; the tables give the whole reason.
func flagHint(reason string) string {
	if i := strings.LastIndex(reason, "; "); i >= 0 {
		reason = reason[i+2:]
	}
	return shorten(reason, 34)
}

// radiusBars draws each landmark's predicted 95 % radius as a band from 0
// to R95 across its row, with a mark at the radius itself.
type radiusBars struct {
	rows   []plotter.XY // X: R95, Y: row
	height vg.Length    // of a row
}

func (b radiusBars) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	half := b.height * 0.32
	for _, r := range b.rows {
		x0, x1, y := trX(0), trX(r.X), trY(r.Y)
		c.FillPolygon(colourRadius.NRGBA(110), []vg.Point{
			{X: x0, Y: y - half}, {X: x1, Y: y - half}, {X: x1, Y: y + half}, {X: x0, Y: y + half},
		})
		c.StrokeLine2(draw.LineStyle{Color: colourRadius, Width: 2}, x1, y-half, x1, y+half)
	}
}

func radiusThumb(c *draw.Canvas) {
	h := (c.Max.Y - c.Min.Y) * 0.35
	y := c.Center().Y
	c.FillPolygon(colourRadius.NRGBA(110), []vg.Point{
		{X: c.Min.X, Y: y - h}, {X: c.Max.X - 2, Y: y - h}, {X: c.Max.X - 2, Y: y + h}, {X: c.Min.X, Y: y + h},
	})
	c.StrokeLine2(draw.LineStyle{Color: colourRadius, Width: 2}, c.Max.X-2, y-h, c.Max.X-2, y+h)
}

// errorsFigure shows every landmark's leave-one-out error, largest on top,
// against its own predicted 95 % radius, the flagged ones marked with the
// gist of their reason.
func errorsFigure(ck *register.CheckJSON) (template.HTML, error) {
	ls := ck.Landmarks
	n := len(ls)
	order := byError(ls)
	p := newPlot("leave-one-out error (µm)", "")
	row := vg.Length(rowHeight)
	if n > maxNamedRows {
		row = maxRowsHeight / vg.Length(n)
	}
	bars := radiusBars{height: row}
	var good, bad, off plotter.XYs
	var ticks []plot.Tick
	var leftLabels, rightLabels plotter.XYLabels
	// The axis ends a little past the landmarks that passed and the radii;
	// a flagged error far beyond them is drawn at the end of the axis,
	// marked as off the scale, so that one gross mistake does not squeeze
	// every other row into a corner.
	base, top := 0.0, 0.0
	for _, l := range ls {
		base = math.Max(base, l.R95UM)
		if l.Flag == "" {
			base = math.Max(base, l.LOOErrorUM)
		}
		top = math.Max(top, l.LOOErrorUM)
	}
	if !(base > 0) {
		base = math.Max(top, 1)
	}
	xMax := math.Max(base, top) * 1.04
	if top > offScale*base {
		xMax = offScale * base
	}
	for rank, i := range order {
		l := ls[i]
		y := float64(n - 1 - rank)
		bars.rows = append(bars.rows, plotter.XY{X: l.R95UM, Y: y})
		pt := plotter.XY{X: l.LOOErrorUM, Y: y}
		label := shorten(l.ID, maxLabelRunes)
		if n > maxNamedRows {
			label = ""
			if rank%10 == 0 {
				label = "#" + number(float64(rank+1))
			}
		}
		if l.Flag != "" && l.LOOErrorUM > xMax {
			pt.X = xMax
			off = append(off, pt)
			leftLabels.XYs = append(leftLabels.XYs, pt)
			leftLabels.Labels = append(leftLabels.Labels, um(l.LOOErrorUM)+" µm, off the scale: "+flagHint(l.Flag))
		} else if l.Flag != "" {
			bad = append(bad, pt)
			hint := flagHint(l.Flag)
			// Labels go where the row has room: left of a point in the
			// right half of the plot, right of it otherwise.
			if l.LOOErrorUM > 0.55*xMax {
				leftLabels.XYs = append(leftLabels.XYs, pt)
				leftLabels.Labels = append(leftLabels.Labels, hint)
			} else {
				rightLabels.XYs = append(rightLabels.XYs, pt)
				rightLabels.Labels = append(rightLabels.Labels, hint)
			}
		} else {
			good = append(good, pt)
		}
		ticks = append(ticks, plot.Tick{Value: y, Label: label})
	}
	p.Y.Tick.Marker = plot.ConstantTicks(ticks)
	p.Y.Tick.Length = 0
	p.Y.Min, p.Y.Max = -0.7, float64(n)-0.3
	p.X.Min, p.X.Max = 0, xMax
	p.Add(verticalGrid())
	p.Add(bars)
	goodStyle := glyph(circleShape, colourLandmark, white, 3.6)
	badStyle := glyph(upShape, colourFlagged, black, 4.6)
	offStyle := glyph(rightShape, colourFlagged, black, 4.6)
	for _, set := range []struct {
		xys plotter.XYs
		sty draw.GlyphStyle
	}{{good, goodStyle}, {bad, badStyle}, {off, offStyle}} {
		if len(set.xys) == 0 {
			continue
		}
		s, err := plotter.NewScatter(set.xys)
		if err != nil {
			return "", err
		}
		s.GlyphStyle = set.sty
		p.Add(s)
	}
	for _, side := range []struct {
		labels plotter.XYLabels
		align  text.XAlignment
		dx     vg.Length
	}{{leftLabels, draw.XRight, -8}, {rightLabels, draw.XLeft, 8}} {
		if len(side.labels.XYs) == 0 {
			continue
		}
		lab, err := plotter.NewLabels(side.labels)
		if err != nil {
			return "", err
		}
		for i := range lab.TextStyle {
			lab.TextStyle[i].Font = sans(noteSize)
			lab.TextStyle[i].Color = colourReference
			lab.TextStyle[i].XAlign = side.align
			lab.TextStyle[i].YAlign = draw.YCenter
		}
		lab.Offset = vg.Point{X: side.dx}
		p.Add(lab)
	}

	legend := newLegend()
	legend.Add("leave-one-out error", glyphThumb(goodStyle))
	if len(bad) > 0 || len(off) == 0 {
		legend.Add("flagged landmark", glyphThumb(badStyle))
	}
	if len(off) > 0 {
		legend.Add("flagged, error off the scale", glyphThumb(offStyle))
	}
	legend.Add("R95: predicted 95 % radius", thumb(radiusThumb))
	lw, lh := legendExtent(&legend)

	dataW := vg.Length(maxFigureWidth) - lw - stripGap - 90
	dataH := vg.Length(math.Max(float64(vg.Length(n)*row), 140))
	in := measure(p, dataW, dataH)
	plotW := dataW + in.left + in.right
	plotH := math.Max(float64(dataH+in.bottom+in.top), float64(lh)+10)
	w := plotW + stripGap + lw
	return figureSVG(w, vg.Length(plotH), "Leave-one-out error of every landmark against its predicted 95 % radius", func(c draw.Canvas) error {
		fillWhite(c)
		p.Draw(sub(c, rect(0, 0, plotW, vg.Length(plotH))))
		legend.Draw(sub(c, rect(plotW+stripGap, 0, w, vg.Length(plotH)-in.top)))
		return nil
	})
}
