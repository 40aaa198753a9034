package report_test

import (
	"bytes"
	"fmt"
	"log"
	"os"
	"strings"

	"ferry/landmarks"
	"ferry/register"
	"ferry/register/report"
	"ferry/simulate"
)

// A report of a landmark file checked and fitted here, as `ferry report`
// does without --transform.
func Example() {
	s, err := simulate.Generate(simulate.SmallParams(), 1)
	if err != nil {
		log.Fatal(err)
	}
	dir, err := os.MkdirTemp("", "ferry-report")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	files, err := s.Write(dir)
	if err != nil {
		log.Fatal(err)
	}

	set, err := landmarks.ReadPairs(files.Landmarks)
	if err != nil {
		log.Fatal(err)
	}
	p, err := register.PrepareLandmarks(set, nil, register.Voxels{})
	if err != nil {
		log.Fatal(err)
	}
	settings := register.Settings{Smoothing: register.Smoothing{Auto: true}}
	a, err := register.Assess(p, settings)
	if err != nil {
		log.Fatal(err)
	}
	prov := register.Provenance{Command: "report", Inputs: []register.Input{{Path: "landmarks.csv", SHA256: set.SHA256}}}
	file := register.NewRegistration(p, a, settings, prov)
	check := a.JSON()
	page, err := report.New(&report.Input{
		LandmarkFile: "landmarks.csv", Check: &check, Source: p.Source,
		Transform: file, Provenance: prov,
	})
	if err != nil {
		log.Fatal(err)
	}
	var html bytes.Buffer
	if _, err := page.WriteTo(&html); err != nil {
		log.Fatal(err)
	}
	fmt.Println("figures:", page.Figures())
	fmt.Println("inline SVG:", strings.Count(html.String(), "<svg "))
	fmt.Println("names a web address:", strings.Contains(html.String(), "http"))
	fmt.Println("says it must be checked by eye:", strings.Contains(html.String(), "checked by eye"))
	// Output:
	// figures: 4
	// inline SVG: 4
	// names a web address: false
	// says it must be checked by eye: true
}
