package report

import (
	"ferry/imaging"
	"ferry/status"
)

// swatch is a colour of the palette: the one imaging holds, so
// that the report's figures and the overlay share their values.
type swatch = imaging.Colour

// The colours of Okabe & Ito (2008, "Color Universal Design", J*Fly).
const (
	black         = imaging.Black
	orange        = imaging.Orange
	skyBlue       = imaging.SkyBlue
	bluishGreen   = imaging.BluishGreen
	yellow        = imaging.Yellow
	blue          = imaging.Blue
	vermillion    = imaging.Vermillion
	reddishPurple = imaging.ReddishPurple
	white         = imaging.White
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

// cellStyle is how a mapped cell of one status is drawn on the map: the
// statuses of register.Mapper from the least to the most serious, in the
// colours every figure gives them (imaging.StatusColour).
type cellStyle struct {
	status status.Status
	fill   swatch
	shape  shape
	label  string
}

// cellStyles lists the drawn statuses in legend order. A status not listed
// (from a newer map) is drawn as "other".
func cellStyles() []cellStyle {
	shapes := map[status.Status]shape{status.OK: circleShape, status.Isolated: squareShape, status.Extrapolated: diamondShape, status.Folded: crossShape}
	var styles []cellStyle
	for _, st := range status.Mapping() {
		if sh, drawn := shapes[st]; drawn {
			styles = append(styles, cellStyle{st, imaging.StatusColour(st), sh, "cell: " + string(st)})
		}
	}
	return append(styles, cellStyle{"", bluishGreen, downShape, "cell: other status"})
}
