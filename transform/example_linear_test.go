package transform_test

import (
	"fmt"
	"math"

	"ferry/transform"
)

// Five vessel branch points picked in an in vivo stack and again in the EM
// volume, where the tissue has shrunk to 80 % in fixation and the volume is
// turned by 90° about z. One EM pick is 0.5 µm off: the fit spreads that
// error over all five residuals, while leave-one-out, predicting the bad pick
// from the four good ones, recovers it whole.
func ExampleFit_similarity() {
	src := []transform.Vec{{0, 0, 0}, {100, 0, 0}, {0, 100, 0}, {0, 0, 100}, {60, 40, 80}}
	dst := make([]transform.Vec, len(src))
	for i, p := range src {
		dst[i] = transform.Vec{20000 - 0.8*p[1], 35000 + 0.8*p[0], 41000 + 0.8*p[2]}
	}
	dst[3][0] += 0.5

	res, err := transform.Fit(transform.Similarity, 3, src, dst, transform.Options{LeaveOneOut: true})
	if err != nil {
		fmt.Println(err)
		return
	}
	sim := res.Transform.(*transform.Linear)
	sum, worst := 0.0, 0.0
	for i, r := range res.Residuals {
		sum += r.Dot(r)
		worst = math.Max(worst, res.LOO[i].Norm())
	}
	fmt.Printf("scale %.4f, mirrored %t\n", sim.Scale, res.Mirrored)
	fmt.Printf("RMS residual %.3f µm, worst leave-one-out error %.3f µm\n", math.Sqrt(sum/float64(len(src))), worst)
	// Output:
	// scale 0.8005, mirrored false
	// RMS residual 0.155 µm, worst leave-one-out error 0.500 µm
}

// A rigid fit can be run backwards: EM coordinates of a soma back into the
// in vivo stack.
func ExampleLinear_Invert() {
	rigid := &transform.Linear{
		Model: transform.Rigid, D: 2, Scale: 1,
		A: transform.Mat{{0, -1, 0}, {1, 0, 0}, {0, 0, 1}}, // 90° anticlockwise
		T: transform.Vec{500, 200},
	}
	p, err := rigid.Invert(transform.Vec{450, 230})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("source (%.1f, %.1f) µm\n", p[0], p[1])
	// Output:
	// source (30.0, 50.0) µm
}
