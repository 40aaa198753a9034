package simulate_test

import (
	"fmt"
	"log"
	"os"
	"path/filepath"

	"ferry/simulate"
)

func Example() {
	s, err := simulate.Generate(simulate.SmallParams(), 1)
	if err != nil {
		log.Fatal(err)
	}
	dir, err := os.MkdirTemp("", "ferry-simulate")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	files, err := s.Write(dir)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(filepath.Base(files.Landmarks), filepath.Base(files.Cells), filepath.Base(files.Candidates))

	inside := 0
	for _, c := range s.Cells {
		if c.InsideEM {
			inside++
		}
	}
	fmt.Printf("%d landmarks, wrong: %v\n", len(s.Landmarks), s.WrongLandmarks())
	fmt.Printf("%d of %d imaged cells lie inside the EM block\n", inside, len(s.Cells))

	// The true map mirrors the field: its Jacobian determinant is negative.
	centre := s.Params.FieldUM.Scale(0.5)
	fmt.Println("mirrored:", s.TrueJacobian(centre).Det() < 0)
	q := s.TrueMap(centre)
	fmt.Printf("field centre lands near (%.0f, %.0f, %.0f) µm in EM\n", q[0], q[1], q[2])
	back, _ := s.TrueInverse(q)
	fmt.Println("inverse recovers it:", back.Sub(centre).Norm() < 1e-6)
	// Output:
	// landmarks.csv cells.csv candidates.csv
	// 17 landmarks, wrong: [v03 v08]
	// 50 of 60 imaged cells lie inside the EM block
	// mirrored: true
	// field centre lands near (298, 300, 174) µm in EM
	// inverse recovers it: true
}
