package imaging

import (
	"fmt"
	"image"
	"image/draw"
	"math"

	"golang.org/x/image/font"
	"golang.org/x/image/font/basicfont"
	"golang.org/x/image/font/gofont/gomono"
	"golang.org/x/image/font/opentype"
	"golang.org/x/image/math/fixed"
)

// labelFace is the Go Mono face at 11 pixels, which has µ (x/image's
// bitmap face has ASCII only). It is parsed on each call: an overlay draws
// one image, and a package-level face would be shared mutable state.
func labelFace() font.Face {
	f, err := opentype.Parse(gomono.TTF)
	if err == nil {
		face, err := opentype.NewFace(f, &opentype.FaceOptions{Size: 11, DPI: 72, Hinting: font.HintingFull})
		if err == nil {
			return face
		}
	}
	return basicfont.Face7x13
}

// drawLabel writes text with its baseline's left end at (x, y), in colour c
// with a one-pixel black outline so that it reads on any ground.
func drawLabel(img *image.RGBA, x, y int, text string, c Colour) {
	drawLabelWith(labelFace(), img, x, y, text, c)
}

func drawLabelWith(face font.Face, img *image.RGBA, x, y int, text string, c Colour) {
	d := font.Drawer{Dst: img, Face: face}
	d.Src = image.NewUniform(Black)
	for dy := -1; dy <= 1; dy++ {
		for dx := -1; dx <= 1; dx++ {
			if dx == 0 && dy == 0 {
				continue
			}
			d.Dot = fixed.P(x+dx, y+dy)
			d.DrawString(text)
		}
	}
	d.Src = image.NewUniform(c)
	d.Dot = fixed.P(x, y)
	d.DrawString(text)
}

// ScaleBarUM is the length (µm) of the scale bar for an image width µm
// wide: the largest of 1, 2 or 5 times a power of ten that is at most a
// fifth of the width.
func ScaleBarUM(width float64) float64 {
	if !(width > 0) || math.IsInf(width, 0) {
		return 0
	}
	target := width / 5
	p := math.Pow(10, math.Floor(math.Log10(target)))
	best := p
	for _, m := range []float64{2, 5, 10} {
		if m*p <= target*(1+1e-12) {
			best = m * p
		}
	}
	return best
}

// drawScaleBar draws a white bar with a black outline and its length in µm
// in the bottom left corner of img, whose pixels are pixelUM wide.
func drawScaleBar(img *image.RGBA, pixelUM float64) {
	b := img.Bounds()
	length := ScaleBarUM(float64(b.Dx()) * pixelUM)
	if length == 0 {
		return
	}
	px := int(math.Round(length / pixelUM))
	if px < 2 || b.Dy() < 30 {
		return
	}
	x0, y0 := b.Min.X+10, b.Max.Y-12
	draw.Draw(img, image.Rect(x0-1, y0-1, x0+px+1, y0+4+1), image.NewUniform(Black), image.Point{}, draw.Src)
	draw.Draw(img, image.Rect(x0, y0, x0+px, y0+4), image.NewUniform(White), image.Point{}, draw.Src)
	drawLabel(img, x0, y0-4, fmt.Sprintf("%g µm", length), White)
}
