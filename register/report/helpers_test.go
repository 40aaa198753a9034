package report

import (
	"bytes"
	"fmt"
	"strings"
	"testing"

	"ferry/landmarks"
	"ferry/register"
	"ferry/simulate"
	"ferry/status"
	"ferry/transform"
)

// scenarioInput is a report's input made the way `ferry report` makes it
// without --transform, from the small simulated scenario: its landmarks (in
// 2-D, without their z) checked and fitted, and its cells mapped. rename,
// when not nil, gives landmark i another id.
func scenarioInput(t testing.TB, dim int, rename func(i int, id string) string) *Input {
	t.Helper()
	s, err := simulate.Generate(simulate.SmallParams(), 1)
	if err != nil {
		t.Fatal(err)
	}
	var csv bytes.Buffer
	if dim == 3 {
		csv.WriteString("id,kind,source_x,source_y,source_z,target_x,target_y,target_z\n")
	} else {
		csv.WriteString("id,kind,source_x,source_y,target_x,target_y\n")
	}
	for i, l := range s.Landmarks {
		id := l.ID
		if rename != nil {
			id = rename(i, id)
		}
		fmt.Fprintf(&csv, "\"%s\",%s", strings.ReplaceAll(id, `"`, `""`), l.Kind)
		for _, v := range []transform.Vec{l.SourceUM, l.TargetUM} {
			for k := range dim {
				fmt.Fprintf(&csv, ",%.9g", v[k])
			}
		}
		csv.WriteByte('\n')
	}
	set, err := landmarks.ParsePairs("landmarks.csv", strings.NewReader(csv.String()))
	if err != nil {
		t.Fatal(err)
	}
	p, err := register.PrepareLandmarks(set, nil, register.Voxels{})
	if err != nil {
		t.Fatal(err)
	}
	settings := register.Settings{Smoothing: register.Smoothing{Auto: true}}
	a, err := register.Assess(p, settings)
	if err != nil {
		t.Fatal(err)
	}
	prov := register.Provenance{Command: "report", Inputs: []register.Input{{Path: "landmarks.csv", SHA256: set.SHA256}}}
	file := register.NewRegistration(p, a, settings, prov)
	mapper, err := register.NewMapper(file)
	if err != nil {
		t.Fatal(err)
	}
	pos := make([]transform.Vec, len(s.Cells))
	for i, c := range s.Cells {
		pos[i] = c.SourceUM
		if dim == 2 {
			pos[i][2] = 0
		}
	}
	mapped := mapper.MapAll(pos, nil, false)
	cells := make([]register.MappedCell, len(mapped))
	for i, m := range mapped {
		cells[i] = register.MappedCell{ID: s.Cells[i].ID, Target: m.Pos, Placed: m.Status != status.NoInverse, R95: m.R95, Status: m.Status}
	}
	check := a.JSON()
	return &Input{
		LandmarkFile: "landmarks.csv", Check: &check, Source: p.Source, Transform: file,
		Cells: cells, CellsFile: "mapped.csv", Provenance: prov,
	}
}

// render makes the page of in and returns its HTML.
func render(t testing.TB, in *Input) (string, *Page) {
	t.Helper()
	page, err := New(in)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if _, err := page.WriteTo(&buf); err != nil {
		t.Fatal(err)
	}
	return buf.String(), page
}
