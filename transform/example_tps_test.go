package transform_test

import (
	"fmt"
	"math"

	"ferry/transform"
)

// Twelve somata picked in vivo and again in EM coordinates near 1e5 µm,
// where the fixed tissue has shrunk to 80 % and bulges smoothly in z. An
// interpolating spline (smoothing 0) passes through every pair; its
// leave-one-out errors say how well each pick is predicted by the others.
// A cell then goes to EM coordinates and back.
func ExampleFit_tps() {
	var src, dst []transform.Vec
	for i := range 12 {
		p := transform.Vec{float64(i%4) * 150, float64(i/4) * 200, float64(i*37%5) * 60}
		bulge := 8 * math.Sin(p[0]/200) * math.Cos(p[1]/300)
		src = append(src, p)
		dst = append(dst, transform.Vec{1e5 + 0.8*p[0], 2e5 + 0.8*p[1], 3e4 + 0.8*p[2] + bulge})
	}
	res, err := transform.Fit(transform.TPS, 3, src, dst, transform.Options{LeaveOneOut: true})
	if err != nil {
		fmt.Println(err)
		return
	}
	worstFit, worstLOO := 0.0, 0.0
	for i := range src {
		worstFit = math.Max(worstFit, res.Residuals[i].Norm())
		worstLOO = math.Max(worstLOO, res.LOO[i].Norm())
	}
	fmt.Printf("largest residual below 1e-6 µm: %t\n", worstFit < 1e-6)
	fmt.Printf("largest leave-one-out error: %.2f µm\n", worstLOO)

	cell := transform.Vec{200, 150, 120}
	em := res.Transform.Apply(cell)
	back, err := res.Transform.Invert(em)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("cell at (%.1f, %.1f, %.1f) µm in EM, back within 1e-6 µm: %t\n", em[0], em[1], em[2], back.Sub(cell).Norm() < 1e-6)
	fmt.Printf("Jacobian determinant %.3f (0.8³ = 0.512)\n", res.Transform.Jacobian(cell).Det())
	// Output:
	// largest residual below 1e-6 µm: true
	// largest leave-one-out error: 3.95 µm
	// cell at (100160.0, 200120.0, 30101.3) µm in EM, back within 1e-6 µm: true
	// Jacobian determinant 0.512 (0.8³ = 0.512)
}

// A landmark dragged past its neighbour folds the spline: FoldCheck finds
// a negative Jacobian determinant between them.
func ExampleFoldCheck() {
	var src, dst []transform.Vec
	for i := range 3 {
		for j := range 3 {
			p := transform.Vec{float64(i) * 100, float64(j) * 100, 0}
			q := p
			if i == 1 && j == 1 {
				q[0] += 150 // dragged past its neighbour at x = 200 µm
			}
			src, dst = append(src, p), append(dst, q)
		}
	}
	res, err := transform.Fit(transform.TPS, 2, src, dst, transform.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	minDet, at := transform.FoldCheck(res.Transform, transform.Vec{0, 0, 0}, transform.Vec{200, 200, 0}, 21)
	fmt.Printf("folds: %t, smallest determinant %.2f at (%.0f, %.0f) µm\n", minDet <= 0, minDet, at[0], at[1])
	// Output:
	// folds: true, smallest determinant -0.83 at (160, 100) µm
}
