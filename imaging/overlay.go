package imaging

import (
	"image"
	"image/color"
	"math"

	"ferry/status"
)

// Colour is an opaque colour written 0xRRGGBB. It implements color.Color.
type Colour uint32

// RGBA implements color.Color.
func (c Colour) RGBA() (r, g, b, a uint32) {
	r, g, b = uint32(c>>16&0xff), uint32(c>>8&0xff), uint32(c&0xff)
	return r * 0x101, g * 0x101, b * 0x101, 0xffff
}

// bytes are the colour's channels.
func (c Colour) bytes() (r, g, b uint8) { return uint8(c >> 16), uint8(c >> 8), uint8(c) }

// NRGBA is the colour with opacity alpha (0–255).
func (c Colour) NRGBA(alpha uint8) color.NRGBA {
	r, g, b := c.bytes()
	return color.NRGBA{R: r, G: g, B: b, A: alpha}
}

// Colours of the palette for colour-blind readers of Okabe and Ito (2008,
// "Color Universal Design (CUD): how to make figures and presentations that
// are friendly to colorblind people", J*Fly), values recalled from memory.
const (
	// SkyBlue (86, 180, 233) shows the target plane by default.
	SkyBlue Colour = 0x56B4E9
	// Orange (230, 159, 0) shows the resampled source by default; added to
	// sky blue it gives a near white, so where both planes are bright the
	// overlay is pale and where only one is, it shows that plane's colour.
	Orange Colour = 0xE69F00
	// Yellow (240, 228, 66) marks cells that need no second look (see
	// StatusColour).
	Yellow Colour = 0xF0E442
	// ReddishPurple (204, 121, 167) marks cells to check by eye.
	ReddishPurple Colour = 0xCC79A7
	// Vermillion (213, 94, 0) marks cells whose answer is not to be used.
	Vermillion Colour = 0xD55E00
	// Black outlines the marks so that they stand out on bright ground.
	Black Colour = 0x000000
	// BluishGreen (0, 158, 115), Blue (0, 114, 178) and White complete the
	// palette for the report's figures.
	BluishGreen Colour = 0x009E73
	Blue        Colour = 0x0072B2
	White       Colour = 0xFFFFFF
)

// Mark is a mapped cell to draw on an overlay.
type Mark struct {
	// X and Y are the cell's position in pixels of the plane: column and
	// row, with pixel centres at whole numbers.
	X, Y float64
	// Status chooses the colour (see StatusColour) and the shape (see
	// MarkShapeName).
	Status status.Status
	// ID, when not empty, is written beside the mark.
	ID string
}

// MarkShapeName names the shape of a mark of the given status, so that
// statuses are told apart without colour: "diamond" for "ok" and "matched"
// (four diagonal strokes), "square" for "ambiguous" (four axis-parallel
// strokes), "plus" for any other status (four ticks pointing at the cell).
// Every shape leaves the cell itself uncovered.
func MarkShapeName(s status.Status) string {
	switch s {
	case "", status.OK, status.Matched:
		return "diamond"
	case status.Ambiguous:
		return "square"
	}
	return "plus"
}

// StatusColour is the colour of a cell of status s in every figure: the
// overlay's marks and the report's uncertainty map alike. The colour says
// how much a cell needs a second look, the shape (which each figure
// chooses) which status it has: yellow none (ok, matched, or no status
// given), orange a little (isolated), reddish purple a check by eye
// (extrapolated, ambiguous), vermillion an answer not to be used (folded,
// no_inverse, unmatched); bluish green marks a word ferry does not know.
func StatusColour(s status.Status) Colour {
	switch s {
	case "", status.OK, status.Matched:
		return Yellow
	case status.Isolated:
		return Orange
	case status.Extrapolated, status.Ambiguous:
		return ReddishPurple
	case status.Folded, status.NoInverse, status.Unmatched:
		return Vermillion
	}
	return BluishGreen
}

// OverlayOptions steer Overlay. The zero value gives the defaults.
type OverlayOptions struct {
	// LowPercent and HighPercent are the percentiles of each plane's
	// values shown as black and as full colour; zero means 0.5 and 99.5.
	LowPercent, HighPercent float64
	// TargetColour and SourceColour colour the two planes; zero (black)
	// means SkyBlue and Orange.
	TargetColour, SourceColour Colour
	// KeepZeros counts zero pixels of the resampled plane in its
	// percentiles. By default they are left out, because Resample writes 0
	// where the source stack does not reach and a large empty margin would
	// otherwise pull the low percentile down to 0.
	KeepZeros bool
	// MarkSize is the distance in pixels from a mark's centre to its
	// corners; zero means 7.
	MarkSize int
	// Colour chooses a mark's colour from its status; nil means
	// StatusColour.
	Colour func(status.Status) Colour
	// PixelUM, when positive, is the width of a pixel in micrometres: a
	// scale bar is then drawn in the bottom left corner.
	PixelUM float64
}

// Overlay composes page 0 of the target plane and page 0 of the resampled
// source into a colour image the size of target, for the eye: each plane is
// contrast-stretched between its low and high percentile, multiplied by its
// colour, and the two are added, clipped at full brightness. Where the
// planes differ in size, the resampled plane is drawn where it overlaps the
// target's top-left corner. Either plane may be nil.
//
// Each mark is drawn as four short strokes that frame the cell without
// covering it, in a shape and colour that depend on its status
// (MarkShapeName, StatusColour), each stroke with a black outline, and its id,
// when it has one, to its right; marks that fall partly outside the image
// are clipped. With OverlayOptions.PixelUM a scale bar is drawn.
func Overlay(target *Stack, resampled *Stack, marks []Mark, opt OverlayOptions) *image.RGBA {
	opt = opt.withDefaults()
	w, h := 0, 0
	switch {
	case planeOK(target):
		w, h = target.Width, target.Height
	case planeOK(resampled):
		w, h = resampled.Width, resampled.Height
	}
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for n := 3; n < len(img.Pix); n += 4 {
		img.Pix[n] = 0xff
	}
	add := func(s *Stack, c Colour, skipZeros bool) {
		if !planeOK(s) {
			return
		}
		lo, hi := percentiles(s.PageData(0), opt.LowPercent, opt.HighPercent, skipZeros)
		scale := 1 / (hi - lo)
		cr, cg, cb := c.bytes()
		cols, rows := min(w, s.Width), min(h, s.Height)
		for j := range rows {
			row := s.Data[j*s.Width:]
			pix := img.Pix[j*img.Stride:]
			for i := range cols {
				a := math.Min(math.Max((float64(row[i])-lo)*scale, 0), 1)
				if a == 0 {
					continue
				}
				p := pix[4*i:]
				p[0] = addChannel(p[0], a, cr)
				p[1] = addChannel(p[1], a, cg)
				p[2] = addChannel(p[2], a, cb)
			}
		}
	}
	add(target, opt.TargetColour, false)
	add(resampled, opt.SourceColour, !opt.KeepZeros)

	// All outlines first, then all strokes, so that no outline covers a
	// neighbouring mark's stroke.
	shapes := map[string]shape{}
	for _, name := range []string{"diamond", "square", "plus"} {
		shapes[name] = markShapeNamed(name, opt.MarkSize)
	}
	for _, m := range marks {
		drawMark(img, m, shapes[MarkShapeName(m.Status)].outline, Black)
	}
	for _, m := range marks {
		drawMark(img, m, shapes[MarkShapeName(m.Status)].stroke, opt.Colour(m.Status))
	}
	face := labelFace()
	for _, m := range marks {
		if m.ID != "" && !math.IsNaN(m.X) && !math.IsNaN(m.Y) && math.Abs(m.X) < 1<<30 && math.Abs(m.Y) < 1<<30 {
			drawLabelWith(face, img, int(math.Round(m.X))+opt.MarkSize+3, int(math.Round(m.Y))+4, m.ID, opt.Colour(m.Status))
		}
	}
	if opt.PixelUM > 0 && !math.IsInf(opt.PixelUM, 0) {
		drawScaleBar(img, opt.PixelUM)
	}
	return img
}

func (o OverlayOptions) withDefaults() OverlayOptions {
	if o.LowPercent == 0 && o.HighPercent == 0 {
		o.LowPercent, o.HighPercent = 0.5, 99.5
	}
	o.LowPercent = math.Min(math.Max(o.LowPercent, 0), 100)
	o.HighPercent = math.Min(math.Max(o.HighPercent, o.LowPercent), 100)
	if o.TargetColour == 0 {
		o.TargetColour = SkyBlue
	}
	if o.SourceColour == 0 {
		o.SourceColour = Orange
	}
	if o.MarkSize <= 0 {
		o.MarkSize = 7
	}
	o.MarkSize = min(o.MarkSize, 256)
	if o.Colour == nil {
		o.Colour = StatusColour
	}
	return o
}

// planeOK reports whether s is a usable plane.
func planeOK(s *Stack) bool { return s != nil && s.check() == nil }

// addChannel adds a·c to channel value p, clipped at 255.
func addChannel(p uint8, a float64, c uint8) uint8 {
	return uint8(math.Min(float64(p)+a*float64(c)+0.5, 255))
}

// percentiles returns the values at the low and high percentiles of data
// (nearest rank), leaving out zeros when skipZeros, with hi > lo.
func percentiles(data []uint16, low, high float64, skipZeros bool) (lo, hi float64) {
	var hist [1 << 16]int
	n := 0
	for _, v := range data {
		if v == 0 && skipZeros {
			continue
		}
		hist[v]++
		n++
	}
	if n == 0 {
		return 0, 1
	}
	rank := func(p float64) float64 {
		// The smallest value with at least ⌈p·n/100⌉ values at or below it.
		want := max(int(math.Ceil(p/100*float64(n))), 1)
		seen := 0
		for v, c := range hist {
			seen += c
			if seen >= want {
				return float64(v)
			}
		}
		return 0xffff
	}
	lo, hi = rank(low), rank(high)
	if hi <= lo {
		hi = lo + 1
	}
	return lo, hi
}

// shape is a mark's pixels as offsets from its centre.
type shape struct {
	stroke, outline []image.Point
}

// markShapeNamed builds the strokes of the shape named (see MarkShapeName)
// with half-size r pixels.
func markShapeNamed(name string, r int) shape {
	var side []image.Point
	switch name {
	case "square":
		// The middle half of the top side of the square of half-side r.
		for x := -r / 4; x <= r/4; x++ {
			side = append(side, image.Pt(x, -r))
		}
	case "plus":
		// A tick on the axis from r/2 to r above the centre.
		for y := r / 2; y <= r; y++ {
			side = append(side, image.Pt(0, -y))
		}
	default:
		return markShape(r)
	}
	return turned(side)
}

// turned completes one side into the four sides of a mark by quarter
// turns, with the outline around them.
func turned(side []image.Point) shape {
	var sh shape
	for _, p := range side {
		for range 4 {
			sh.stroke = append(sh.stroke, p)
			p = image.Pt(-p.Y, p.X) // a quarter turn
		}
	}
	in := make(map[image.Point]bool)
	for _, p := range sh.stroke {
		in[p] = true
	}
	halo := make(map[image.Point]bool)
	for _, p := range sh.stroke {
		for dy := -1; dy <= 1; dy++ {
			for dx := -1; dx <= 1; dx++ {
				q := p.Add(image.Pt(dx, dy))
				if !in[q] && !halo[q] {
					halo[q] = true
					sh.outline = append(sh.outline, q)
				}
			}
		}
	}
	return sh
}

// markShape builds the cut-corner diamond of half-diagonal r pixels: the
// middle half of each side of the diamond with corners (±r, 0) and (0, ±r),
// as one-pixel diagonal lines. One side is built and turned by quarter
// turns, so the mark is exactly symmetric; the outline is every pixel next
// to a stroke pixel that is not one itself.
func markShape(r int) shape {
	// The side from (0, −r) to (r, 0) is the pixels x − y = r; its middle
	// half runs over x from r/4 to 3r/4.
	var side []image.Point
	for x := (r + 3) / 4; 4*x <= 3*r; x++ {
		side = append(side, image.Pt(x, x-r))
	}
	return turned(side)
}

// drawMark sets the pixels of points around m's position to c, clipped to
// the image; marks at non-finite positions are skipped.
func drawMark(img *image.RGBA, m Mark, points []image.Point, c Colour) {
	if math.IsNaN(m.X) || math.IsNaN(m.Y) || math.Abs(m.X) > 1<<30 || math.Abs(m.Y) > 1<<30 {
		return
	}
	centre := image.Pt(int(math.Round(m.X)), int(math.Round(m.Y)))
	b := img.Bounds()
	cr, cg, cb := c.bytes()
	for _, p := range points {
		q := centre.Add(p)
		if q.In(b) {
			img.SetRGBA(q.X, q.Y, color.RGBA{cr, cg, cb, 0xff})
		}
	}
}
