package register

import (
	"bytes"
	"encoding/csv"
	"strings"
	"testing"

	"ferry/landmarks"
	"ferry/status"
	"ferry/transform"
)

// Rows written by hand read back through encoding/csv field for field, with
// ids and extra values that need quoting, one that begins with the comment
// mark among them.
func TestWriteMappedQuoting(t *testing.T) {
	ids := []string{"plain", "with,comma", `with"quote`, "#hash", " lead", "line\nbreak", `\.`, "é"}
	cells := &landmarks.PointSet{Path: "cells.csv", Dim: 3, ExtraColumns: []string{"note"}}
	var mapped []Mapped
	for i, id := range ids {
		cells.Points = append(cells.Points, landmarks.Point{ID: id, Line: i + 2, Extra: []string{id + "!"}})
		mapped = append(mapped, Mapped{Pos: transform.Vec{1.5, -0.00001, 3}, SD: transform.Vec{1, 2, 3}, R95: 4, Status: status.OK})
	}
	var b bytes.Buffer
	if err := WriteMapped(&b, cells, mapped, NewMappedLayout(cells, FrameTarget, nil), nil); err != nil {
		t.Fatal(err)
	}
	// The header row comes first: no comment line before it.
	body := b.String()
	if !strings.HasPrefix(body, "id,x,y,z,sd_x_um,sd_y_um,sd_z_um,r95_um,status,target_x_um,target_y_um,target_z_um,note\n") {
		t.Errorf("table begins %q, want the header row", body[:strings.Index(body, "\n")])
	}
	r := csv.NewReader(strings.NewReader(body))
	rows, err := r.ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != len(ids)+1 {
		t.Fatalf("%d rows read back, want %d", len(rows), len(ids)+1)
	}
	for i, id := range ids {
		row := rows[i+1]
		if row[0] != id || row[len(row)-1] != id+"!" {
			t.Errorf("row %d: id %q and note %q, want %q and %q", i, row[0], row[len(row)-1], id, id+"!")
		}
		if row[2] != "0.0000" || row[1] != "1.5000" {
			t.Errorf("row %d: coordinates %q, %q", i, row[1], row[2])
		}
	}
	if !strings.Contains(body, "\n\"#hash\",") {
		t.Error("an id beginning with # is not quoted")
	}
}
