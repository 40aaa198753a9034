package export_test

import (
	"context"
	"fmt"
	"log"
	"os"
	"path/filepath"

	"ferry/register"
	"ferry/register/export"
	"ferry/transform"
)

// The affine part of a transform as the plain-text 4×4 matrix that numpy,
// R or MATLAB read, with the convention in its comment lines.
func Example() {
	dir, err := os.MkdirTemp("", "export-example-")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	file := &register.Registration{Transform: &transform.Linear{
		Model: transform.Affine, D: 3, Scale: 1,
		A: transform.Mat{{0.9, -0.1, 0}, {0.1, 1.05, 0}, {0, 0, 0.8}},
		T: transform.Vec{50, -10, 20},
	}}
	if _, err := export.Write(context.Background(), dir, file, export.Options{}); err != nil {
		log.Fatal(err)
	}
	text, err := os.ReadFile(filepath.Join(dir, export.AffineUMFile))
	if err != nil {
		log.Fatal(err)
	}
	fmt.Print(string(text))
	// Output:
	// # affine part of the affine transform, micrometres on both sides
	// # input = source (in vivo) side, output = target (EM) side; column vectors: [x' y' z' 1]ᵀ = M·[x y z 1]ᵀ, i.e. x' = A·x + t
	// 0.9 -0.1 0 50
	// 0.1 1.05 0 -10
	// 0 0 0.8 20
	// 0 0 0 1
}
