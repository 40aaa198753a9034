package landmarks_test

import (
	"errors"
	"fmt"
	"strings"

	"ferry/landmarks"
	"ferry/transform"
)

func ExampleParsePairs() {
	const table = `# picked on 2024-05-01
id,kind,source_x,source_y,source_z,target_x,target_y,target_z,note
V1,vessel,10,20,5,110,215,48,"branch, deep"
S1,Soma,95,140,30,201,338,81,
`
	set, err := landmarks.ParsePairs("pairs.csv", strings.NewReader(table))
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(set.Dim, "D,", len(set.Pairs), "pairs, extra columns", set.ExtraColumns)
	for _, p := range set.Pairs {
		fmt.Printf("line %d: %s (%s) %v -> %v %q\n", p.Line, p.ID, p.Kind, p.Source, p.Target, p.Extra)
	}
	// Output:
	// 3 D, 2 pairs, extra columns [note]
	// line 3: V1 (vessel) [10 20 5] -> [110 215 48] ["branch, deep"]
	// line 4: S1 (soma) [95 140 30] -> [201 338 81] [""]
}

func ExampleInputError() {
	const table = "id,x,y,z\nc1,1,2,3\nc2,4,5,1.2.3\n"
	_, err := landmarks.ParsePoints("cells.csv", "cells", strings.NewReader(table))
	fmt.Println(err)
	var in *landmarks.InputError
	if errors.As(err, &in) {
		fmt.Println(in.Line, in.Column)
	}
	// Output:
	// cells.csv:3: column "z": "1.2.3" is not a number
	// 3 z
}

func ExampleParseTriple() {
	voxel, err := landmarks.ParseTriple("--source-voxel", "0.5,0.5,2", 3)
	fmt.Println(voxel, err)
	_, err = landmarks.ParseTriple("--source-voxel", "0.5,0", 3)
	fmt.Println(err)
	// Output:
	// [0.5 0.5 2] <nil>
	// --source-voxel: want 3 positive numbers X,Y,Z in micrometres, got "0.5,0" (2 numbers)
}

func ExamplePointSet_ScaleVoxels() {
	cells, err := landmarks.ParsePoints("cells.csv", "cells", strings.NewReader("id,x,y,z\nc1,100,40,12\n"))
	if err != nil {
		fmt.Println(err)
		return
	}
	voxel, _ := landmarks.ParseTriple("--source-voxel", "0.5,0.5,2", 3)
	cells.ScaleVoxels(voxel)
	fmt.Println(cells.Points[0].Pos, "µm")
	// Output:
	// [50 20 24] µm
}

func ExamplePairSet_Exclude() {
	const table = "id,kind,source_x,source_y,target_x,target_y\nA,,0,0,1,1\nB,,5,0,6,1\nC,,0,5,1,6\n"
	set, _ := landmarks.ParsePairs("pairs.csv", strings.NewReader(table))
	ids, _ := landmarks.ParseIDList("--exclude", "B")
	kept, err := set.Exclude(ids)
	fmt.Println(kept.IDs(), err)
	_, err = set.Exclude([]string{"D"})
	fmt.Println(err)
	// Output:
	// [A C] <nil>
	// no landmark with id "D" in pairs.csv
}

func ExampleCheckSpread() {
	// Every landmark picked in the same imaging plane.
	onePlane := []transform.Vec{{0, 0, 40}, {200, 0, 40}, {0, 200, 40}, {200, 200, 40}, {90, 110, 40}}
	fmt.Println(landmarks.CheckSpread(onePlane, 3, 2))
	fmt.Println(landmarks.CheckSpread(onePlane, 3, 3))
	// Output:
	// <nil>
	// the 5 landmarks lie on a plane (less than 0.001 µm RMS distance from it, against 89.6 µm RMS across it): the model needs them spread in depth too; add landmarks above or below that plane
}
