package suggest_test

import (
	"fmt"
	"math"

	"ferry/landmarks"
	"ferry/register"
	"ferry/register/suggest"
	"ferry/transform"
)

// Landmarks fill a 300 µm cube but for one corner, where the cells are. Of
// three places one could look for the next landmark, the corner among the
// cells helps them most, and the second choice is judged after the first.
func ExampleSuggest() {
	p := &register.Problem{Dim: 3}
	for i := range 4 {
		for j := range 4 {
			for k := range 4 {
				src := transform.Vec{100 * float64(i), 100 * float64(j), 100 * float64(k)}
				if src[0] >= 200 && src[1] >= 200 && src[2] >= 200 {
					continue // the empty corner
				}
				// A smooth warp and a deterministic half-micrometre wobble.
				wobble := 0.5 * math.Sin(float64(7*i+3*j+k))
				dst := transform.Vec{
					0.9*src[0] + 2e4 + 3*math.Sin(src[1]/120) + wobble,
					0.92*src[1] + 1e4 - wobble,
					0.8*src[2] + 3e3 + 2*math.Cos(src[0]/150),
				}
				p.IDs = append(p.IDs, fmt.Sprintf("L%d%d%d", i, j, k))
				p.Kinds = append(p.Kinds, landmarks.KindVessel)
				p.Source, p.Target = append(p.Source, src), append(p.Target, dst)
			}
		}
	}
	s := register.Settings{Model: transform.TPS, Smoothing: register.Smoothing{Value: 1}}
	a, err := register.Assess(p, s)
	if err != nil {
		fmt.Println(err)
		return
	}
	f := register.NewRegistration(p, a, s, register.Provenance{Command: "example"})
	var cells []transform.Vec
	for i := range 5 {
		for j := range 5 {
			cells = append(cells, transform.Vec{210 + 20*float64(i), 210 + 20*float64(j), 260})
		}
	}
	places := []transform.Vec{{150, 150, 150}, {260, 260, 260}, {0, 300, 0}}
	res, err := suggest.Suggest(f, cells, suggest.Options{N: 2, Candidates: places})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("median r95 of the cells now: %.2f µm\n", res.R95Before)
	for _, sg := range res.Suggestions {
		fmt.Printf("%d. landmark at (%3.0f, %3.0f, %3.0f) µm, look near (%.0f, %.0f, %.0f) µm in EM within %.1f µm: median r95 %.2f µm\n",
			sg.Rank, sg.Source[0], sg.Source[1], sg.Source[2], sg.Target[0], sg.Target[1], sg.Target[2], sg.TargetR95, sg.R95After)
	}
	// Output:
	// median r95 of the cells now: 1.66 µm
	// 1. landmark at (260, 260, 260) µm, look near (20237, 10239, 3208) µm in EM within 1.9 µm: median r95 0.93 µm
	// 2. landmark at (150, 150, 150) µm, look near (20138, 10138, 3121) µm in EM within 0.8 µm: median r95 0.93 µm
}
