package match_test

import (
	"fmt"
	"log"
	"strings"

	"ferry/landmarks"
	"ferry/register"
	"ferry/register/match"
	"ferry/transform"
)

// exampleMapper fits an affine transform to 64 landmark pairs on a 150 µm
// grid, whose targets are the sources shifted by (1000, 2000, 300) µm with a
// deterministic sub-micrometre jitter.
func exampleMapper() *register.Mapper {
	var b strings.Builder
	b.WriteString("id,kind,source_x,source_y,source_z,target_x,target_y,target_z\n")
	n := 0
	for i := range 4 {
		for j := range 4 {
			for k := range 4 {
				x, y, z := 50.0*float64(i), 50.0*float64(j), 50.0*float64(k)
				jitter := 0.3 * float64((n*7)%5-2)
				fmt.Fprintf(&b, "v%02d,vessel,%g,%g,%g,%g,%g,%g\n", n, x, y, z, x+1000+jitter, y+2000-jitter, z+300+jitter/2)
				n++
			}
		}
	}
	set, err := landmarks.ParsePairs("landmarks.csv", strings.NewReader(b.String()))
	if err != nil {
		log.Fatal(err)
	}
	prob, err := register.PrepareLandmarks(set, nil, register.Voxels{})
	if err != nil {
		log.Fatal(err)
	}
	s := register.Settings{Model: transform.Affine}
	a, err := register.Assess(prob, s)
	if err != nil {
		log.Fatal(err)
	}
	file := register.NewRegistration(prob, a, s, register.Provenance{Command: "fit"})
	m, err := register.NewMapper(file)
	if err != nil {
		log.Fatal(err)
	}
	return m
}

func ExampleMatch() {
	mapper := exampleMapper()
	// EM nuclei on a 20 µm grid over the target block, and two more close
	// together where one cell will land.
	var cands []transform.Vec
	var ids []string
	for i := range 8 {
		for j := range 8 {
			for k := range 8 {
				cands = append(cands, transform.Vec{1010 + 20*float64(i), 2010 + 20*float64(j), 310 + 20*float64(k)})
				ids = append(ids, fmt.Sprintf("n%03d", len(ids)))
			}
		}
	}
	cands = append(cands, transform.Vec{1082.5, 2080, 380}, transform.Vec{1077.5, 2080, 380})
	ids = append(ids, "n512", "n513")

	cells := []transform.Vec{
		{50.4, 50.2, 49.5}, // on nucleus (1050, 2050, 350)
		{80, 80, 80},       // between n512 and n513
		{100, 100, 400},    // 250 µm beyond the block
	}
	sd := transform.Vec{0.8, 0.8, 2}
	res, err := match.Match(mapper, cells, &sd, cands, match.Options{CandidateIDs: ids})
	if err != nil {
		log.Fatal(err)
	}
	for i, r := range res {
		cand, runner := "-", "-"
		if r.Candidate >= 0 {
			cand = ids[r.Candidate]
		}
		if r.RunnerUp >= 0 {
			runner = ids[r.RunnerUp]
		}
		fmt.Printf("cell %d: %-9s %s p %.2f, runner-up %s p %.2f, %.1f µm away\n", i+1, r.Status, cand, r.PMatch, runner, r.PRunnerUp, r.DistanceUM)
	}
	// Output:
	// cell 1: matched   n146 p 1.00, runner-up - p 0.00, 0.7 µm away
	// cell 2: ambiguous n513 p 0.50, runner-up n512 p 0.50, 2.5 µm away
	// cell 3: unmatched - p 1.00, runner-up - p 0.00, 250.4 µm away
}

func ExampleResolveDecisions() {
	cells, _ := landmarks.ParsePoints("cells.csv", "cells", strings.NewReader("id,x,y,z\nc1,10,10,10\nc2,40,10,10\nc3,70,10,10\n"))
	cands, _ := landmarks.ParsePoints("nuclei.csv", "candidates", strings.NewReader("id,x,y,z\nn1,1010,2010,310\nn2,1040,2010,310\n"))
	set, err := landmarks.ParseDecisions("decisions.csv", strings.NewReader(
		"id,candidate,decision\nc1,n1,accepted\nc2,n1,rejected\nc3,,none\n"))
	if err != nil {
		log.Fatal(err)
	}
	d, err := match.ResolveDecisions(set, cells, cands)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println("fixed:", d.FixedPairs(), "forbidden:", d.ForbiddenPairs(), "c3 has none:", d.None[2])
	for _, p := range d.LandmarkPairs(cells, cands) {
		fmt.Println(p.ID, p.Kind, p.Source, p.Target)
	}
	// Output:
	// fixed: [[0 0]] forbidden: [[1 0]] c3 has none: true
	// decided:c1 decided_soma [10 10 10] [1010 2010 310]
}
