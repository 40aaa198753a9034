package transform_test

import (
	"fmt"
	"math"

	"ferry/transform"
)

// Eight vessel branch points spread over a 300 µm cube fix a rigid map from
// the in vivo stack to the EM volume. With each EM pick 1 µm off on each
// axis (s = 1 µm²), the predictor says how far the fitted map itself may be
// off: least at the landmarks' centroid, and growing with the distance from
// it, as the error of the fitted rotation is levered out.
func ExampleNewPredictor() {
	src := []transform.Vec{
		{0, 0, 0}, {300, 0, 20}, {0, 300, 40}, {10, 20, 300},
		{300, 300, 0}, {290, 10, 310}, {20, 280, 290}, {310, 300, 300},
	}
	dst := make([]transform.Vec, len(src))
	for i, p := range src {
		dst[i] = transform.Vec{62000 - p[1], 18000 + p[0], 9000 + p[2]} // 90° about z
	}
	res, err := transform.Fit(transform.Rigid, 3, src, dst, transform.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	pred, err := transform.NewPredictor(res.Transform, src, nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	const s = 1.0 // µm², the same on every axis
	for _, cell := range []transform.Vec{{155, 150, 155}, {150, 150, 600}, {2000, 150, 150}} {
		f := pred.Factor(cell)
		rms := math.Sqrt(s * (f[0][0] + f[1][1] + f[2][2]))
		fmt.Printf("cell at (%4.0f, %3.0f, %3.0f) µm: RMS error of the map %.2f µm\n", cell[0], cell[1], cell[2], rms)
	}
	// Output:
	// cell at ( 155, 150, 155) µm: RMS error of the map 0.61 µm
	// cell at ( 150, 150, 600) µm: RMS error of the map 1.25 µm
	// cell at (2000, 150, 150) µm: RMS error of the map 4.54 µm
}
