package report

import "image/color"

// swatch is an opaque colour written 0xRRGGBB. It is a color.Color, and a
// constant, so that the palette cannot be changed at run time.
type swatch uint32

// The colours of Okabe & Ito (2008, "Color Universal Design", J*Fly). The
// hexadecimal values are recalled from memory of that palette.
const (
	black         swatch = 0x000000
	orange        swatch = 0xE69F00
	skyBlue       swatch = 0x56B4E9
	bluishGreen   swatch = 0x009E73
	yellow        swatch = 0xF0E442
	blue          swatch = 0x0072B2
	vermillion    swatch = 0xD55E00
	reddishPurple swatch = 0xCC79A7
	white         swatch = 0xFFFFFF
)

// The roles of the colours, the same in every figure; docs/report.md lists
// them for the reader.
const (
	colourLandmark    = blue       // a landmark that passed the check, its error and its arrow
	colourFlagged     = vermillion // a flagged landmark, its error and its arrow
	colourRadius      = skyBlue    // predicted 95 % radii, the calibration's binomial band
	colourReference   = black      // axes, text, the calibration's diagonal, scale bars
	colourMapLandmark = black      // landmarks drawn on the uncertainty map (blue is the map's own)
)

// RGBA implements color.Color.
func (s swatch) RGBA() (r, g, b, a uint32) {
	return s.nrgba(0xff).RGBA()
}

// nrgba is the colour with opacity alpha (0–255).
func (s swatch) nrgba(alpha uint8) color.NRGBA {
	return color.NRGBA{R: uint8(s >> 16), G: uint8(s >> 8), B: uint8(s), A: alpha}
}

// cellStyle is how a mapped cell of one status is drawn on the map: the
// statuses of register.Mapper from the least to the most serious.
type cellStyle struct {
	status string
	fill   swatch
	shape  shape
	label  string
}

// cellStyles lists the drawn statuses in legend order. A status not listed
// (from a newer map) is drawn as "other".
func cellStyles() []cellStyle {
	return []cellStyle{
		{"ok", yellow, circleShape, "cell: ok"},
		{"isolated", orange, squareShape, "cell: isolated"},
		{"extrapolated", reddishPurple, diamondShape, "cell: extrapolated"},
		{"folded", vermillion, crossShape, "cell: folded"},
		{"", bluishGreen, downShape, "cell: other status"},
	}
}
