package register_test

import (
	"bytes"
	"context"
	"fmt"
	"log"

	"ferry/register"
	"ferry/transform"
)

// Fit a registration, write it as ferry fit writes transform.json, read it
// back as ferry map does, and map a cell through what was read. The file
// holds everything mapping needs: the transform, its leave-one-out check,
// the uncertainty model and the landmark file it came from.
func ExampleFit() {
	problem, err := register.PrepareLandmarks(examplePairs(), []string{"L14"}, register.Voxels{})
	if err != nil {
		log.Fatal(err)
	}
	settings := register.Settings{Model: transform.Affine}
	reg, _, err := register.Fit(context.Background(), problem, settings, register.Provenance{Command: "example"})
	if err != nil {
		log.Fatal(err)
	}
	var file bytes.Buffer
	if _, err := reg.WriteTo(&file); err != nil {
		log.Fatal(err)
	}
	back, err := register.ReadRegistration(&file, "transform.json")
	if err != nil {
		log.Fatal(err)
	}
	mapper, err := register.NewMapper(back)
	if err != nil {
		log.Fatal(err)
	}
	cell := mapper.Map(transform.Vec{100, 200, 50}, nil)
	fmt.Printf("%s fit of %s without %v, leave-one-out RMS under 1 µm: %v\n",
		back.Transform.Kind(), back.Landmarks.Path, back.Landmarks.Excluded, back.Check.RMSUM < 1)
	fmt.Printf("cell at (%.0f, %.0f, %.0f) µm, %s, 95 %% radius under 2 µm: %v\n",
		cell.Pos[0], cell.Pos[1], cell.Pos[2], cell.Status, cell.R95 < 2)
	// Output:
	// affine fit of landmarks.csv without [L14], leave-one-out RMS under 1 µm: true
	// cell at (110, 170, 45) µm, ok, 95 % radius under 2 µm: true
}
