package register_test

import (
	"fmt"
	"log"
	"math"
	"strings"

	"ferry/landmarks"
	"ferry/register"
	"ferry/transform"
)

// Fit a registration from landmark pairs, check it, and map a cell with its
// uncertainty: the library path behind ferry fit and ferry map. The pairs
// follow an affine map (the EM side shrunk to 90 % in x and y, 80 % in z,
// shifted) with a little picking noise; one pair is a wrong correspondence.
func Example() {
	set := examplePairs()
	problem, err := register.PrepareLandmarks(set, nil, register.Voxels{})
	if err != nil {
		log.Fatal(err)
	}
	settings := register.Settings{Model: transform.Affine}
	check, err := register.Assess(problem, settings)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println("flagged:", check.Flagged())

	// Fit again without the flagged landmark, and map a cell through it.
	clean, err := register.PrepareLandmarks(set, check.Flagged(), register.Voxels{})
	if err != nil {
		log.Fatal(err)
	}
	fitted, err := register.Assess(clean, settings)
	if err != nil {
		log.Fatal(err)
	}
	file := register.NewRegistration(clean, fitted, settings, register.Provenance{Command: "example"})
	mapper, err := register.NewMapper(file)
	if err != nil {
		log.Fatal(err)
	}
	cell := mapper.Map(transform.Vec{100, 200, 50}, nil)
	fmt.Printf("model %s; cell at (%.0f, %.0f, %.0f) µm, %s, 95 %% radius under 2 µm: %v\n",
		fitted.Chosen, cell.Pos[0], cell.Pos[1], cell.Pos[2], cell.Status, cell.R95 < 2)
	// Output:
	// flagged: [L14]
	// model affine; cell at (110, 170, 45) µm, ok, 95 % radius under 2 µm: true
}

// examplePairs are the landmark pairs of the examples: an affine map (the
// EM side shrunk to 90 % in x and y, 80 % in z, shifted) with a little
// picking noise, and one wrong correspondence, L14.
func examplePairs() *landmarks.PairSet {
	var b strings.Builder
	b.WriteString("id,kind,source_x,source_y,source_z,target_x,target_y,target_z\n")
	i := 0
	for _, x := range []float64{0, 150, 300} {
		for _, y := range []float64{0, 150, 300} {
			for _, z := range []float64{0, 100, 200} {
				i++
				// A deterministic picking error of at most 0.5 µm.
				e := 0.5 * math.Sin(float64(7*i))
				tx, ty, tz := 0.9*x+20+e, 0.9*y-10-e, 0.8*z+5+e/2
				if i == 14 {
					tx += 40 // the wrong correspondence
				}
				fmt.Fprintf(&b, "L%02d,vessel,%g,%g,%g,%.3f,%.3f,%.3f\n", i, x, y, z, tx, ty, tz)
			}
		}
	}
	set, err := landmarks.ParsePairs("landmarks.csv", strings.NewReader(b.String()))
	if err != nil {
		log.Fatal(err)
	}
	return set
}

// Check a set of landmark pairs by exact leave-one-out, as ferry check
// --model affine does: the landmark whose error is out of line is flagged;
// checked again without it, no landmark's leave-one-out error exceeds the
// picking noise by much.
func ExampleAssess() {
	set := examplePairs()
	for _, exclude := range [][]string{nil, {"L14"}} {
		problem, err := register.PrepareLandmarks(set, exclude, register.Voxels{})
		if err != nil {
			log.Fatal(err)
		}
		check, err := register.Assess(problem, register.Settings{Model: transform.Affine})
		if err != nil {
			log.Fatal(err)
		}
		worst := 0.0
		for _, l := range check.Landmarks {
			worst = max(worst, l.LOOError)
		}
		fmt.Printf("%d pairs: flagged %v, largest leave-one-out error %.1f µm\n", problem.Len(), check.Flagged(), worst)
	}
	// Output:
	// 27 pairs: flagged [L14], largest leave-one-out error 39.7 µm
	// 26 pairs: flagged [], largest leave-one-out error 0.9 µm
}

// Map cells through a fitted registration, as ferry map does: each cell
// gets its target position, its 95 % radius and a status; a cell far
// beyond the landmarks is extrapolated, with a larger radius.
func ExampleMapper_MapAll() {
	set := examplePairs()
	problem, err := register.PrepareLandmarks(set, []string{"L14"}, register.Voxels{})
	if err != nil {
		log.Fatal(err)
	}
	settings := register.Settings{Model: transform.Affine}
	fitted, err := register.Assess(problem, settings)
	if err != nil {
		log.Fatal(err)
	}
	file := register.NewRegistration(problem, fitted, settings, register.Provenance{Command: "example"})
	mapper, err := register.NewMapper(file)
	if err != nil {
		log.Fatal(err)
	}
	cells := []transform.Vec{{150, 150, 100}, {900, 150, 100}}
	for _, m := range mapper.MapAll(cells, nil, false) {
		fmt.Printf("(%.0f, %.0f, %.0f) µm, %s, r95 %.1f µm\n", m.Pos[0], m.Pos[1], m.Pos[2], m.Status, m.R95)
	}
	// Output:
	// (155, 125, 85) µm, ok, r95 0.9 µm
	// (830, 125, 85) µm, extrapolated, r95 8.9 µm
}
