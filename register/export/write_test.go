package export

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"ferry/landmarks"
	"ferry/register"
	"ferry/status"
	"ferry/transform"
)

// Write makes the files it lists; the manifest's matrices and sampling
// errors are those of the transform; the point list holds the mapped cells
// in target voxels; a linear model gets no field.
func TestWrite(t *testing.T) {
	s := testSpline(t, 3)
	tv := transform.Vec{0.5, 0.5, 2}
	file := &register.Registration{Transform: s, Voxels: register.Voxels{Target: &tv}}
	dir := t.TempDir()
	// A mapped table in target voxels, with its sidecar.
	cells := &landmarks.PointSet{Dim: 3, Points: []landmarks.Point{{ID: "a"}, {ID: "b"}, {ID: "c"}}}
	mapped := []register.Mapped{
		{Pos: transform.Vec{10, 20, 30}, R95: 2, Status: status.OK},
		{Status: status.NoInverse},
		{Pos: transform.Vec{-5, 7.5, 1}, R95: 3, Status: status.Extrapolated},
	}
	mappedPath := filepath.Join(dir, "mapped.csv")
	if err := register.WriteMappedTable(context.Background(), mappedPath, register.Provenance{Command: "map"}, cells, mapped, register.FrameTarget, &tv); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "export")
	res, err := Write(context.Background(), out, file, Options{Mapped: mappedPath, Grid: GridOptions{Margin: -1}, Provenance: register.Provenance{Command: "export"}})
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range res.Files {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Errorf("listed file %s: %v", f, err)
		}
	}
	entries, _ := os.ReadDir(out)
	if len(entries) != len(res.Files) {
		t.Errorf("folder holds %d entries, %d listed", len(entries), len(res.Files))
	}
	var m Manifest
	data, err := os.ReadFile(filepath.Join(out, ManifestFile))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(data, &m); err != nil {
		t.Fatal(err)
	}
	a, b, _ := transform.AffinePart(s)
	if m.AffineUM[0][1] != a[0][1] || m.AffineUM[2][3] != b[2] || m.AffineVoxel == nil || m.Field == nil || m.Points == nil {
		t.Errorf("manifest %+v", m)
	}
	if m.Field.SequenceError.MaxUM <= 0 || m.Field.SequenceError != res.SequenceError {
		t.Errorf("manifest sampling error %+v, result %+v", m.Field.SequenceError, res.SequenceError)
	}
	f, err := os.Open(filepath.Join(out, PointsFile))
	if err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(f).ReadAll()
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(rows[0], PointColumns(3)) || len(rows) != 3 || res.Unplaced != 1 {
		t.Fatalf("point list %v, %d unplaced", rows, res.Unplaced)
	}
	want := []float64{-5 / tv[0], 7.5 / tv[1], 1 / tv[2]}
	for k, w := range want {
		if v, _ := strconv.ParseFloat(rows[2][1+k], 64); math.Abs(v-w) > 1e-4 {
			t.Errorf("cell c axis %d: %s voxels, want %g", k, rows[2][1+k], w)
		}
	}

	// A linear model: matrices only.
	lin := &register.Registration{Transform: &transform.Linear{Model: transform.Affine, D: 3, A: transform.Identity(), T: transform.Vec{1, 2, 3}, Scale: 1}}
	res, err = Write(context.Background(), filepath.Join(dir, "lin"), lin, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if res.Field != nil || !slices.Equal(res.Files, []string{ManifestFile, AffineUMFile}) {
		t.Errorf("linear export: field %v, files %v", res.Field != nil, res.Files)
	}
	txt, err := os.ReadFile(filepath.Join(dir, "lin", AffineUMFile))
	if err != nil {
		t.Fatal(err)
	}
	if want := "1 0 0 1\n0 1 0 2\n0 0 1 3\n0 0 0 1\n"; string(txt[len(txt)-len(want):]) != want {
		t.Errorf("affine_um.txt ends\n%s\nwant\n%s", txt, want)
	}
}

// A folder holding files of an earlier export that this one would not
// replace is refused with their name, and left as it was; files this
// export replaces are no obstacle.
func TestWriteRefusesStaleFiles(t *testing.T) {
	s := testSpline(t, 3)
	dir := filepath.Join(t.TempDir(), "export")
	spline := &register.Registration{Transform: s}
	if _, err := Write(context.Background(), dir, spline, Options{Grid: GridOptions{Margin: -1, Spacing: transform.Vec{50, 50, 50}}}); err != nil {
		t.Fatal(err)
	}
	// The same export again replaces its own files.
	if _, err := Write(context.Background(), dir, spline, Options{Grid: GridOptions{Margin: -1, Spacing: transform.Vec{50, 50, 50}}}); err != nil {
		t.Fatalf("exporting again into the same folder: %v", err)
	}
	// An affine model writes no field: the spline's would be left behind.
	lin := &register.Registration{Transform: &transform.Linear{Model: transform.Affine, D: 3, A: transform.Identity(), T: transform.Vec{1, 2, 3}, Scale: 1}}
	before, err := os.ReadFile(filepath.Join(dir, ManifestFile))
	if err != nil {
		t.Fatal(err)
	}
	_, err = Write(context.Background(), dir, lin, Options{})
	if err == nil || !strings.Contains(err.Error(), FieldTIFFFile) || !strings.Contains(err.Error(), "another folder") {
		t.Fatalf("error %v, want a refusal naming %s", err, FieldTIFFFile)
	}
	after, err := os.ReadFile(filepath.Join(dir, ManifestFile))
	if err != nil || string(after) != string(before) {
		t.Errorf("the refused export changed %s", ManifestFile)
	}
}
