package simulate

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"ferry/transform"
)

// readTable parses a written CSV the way the contract says a reader must:
// the header row first, naming the columns.
func readTable(t *testing.T, path string) (header []string, rows []map[string]string) {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	r := csv.NewReader(bytes.NewReader(data))
	records, err := r.ReadAll()
	if err != nil {
		t.Fatalf("%s does not parse as CSV: %v", path, err)
	}
	header = records[0]
	for _, rec := range records[1:] {
		row := map[string]string{}
		for i, h := range header {
			row[h] = rec[i]
		}
		rows = append(rows, row)
	}
	return header, rows
}

func parseVec(t *testing.T, row map[string]string, cols ...string) transform.Vec {
	t.Helper()
	var v transform.Vec
	for i, c := range cols {
		x, err := strconv.ParseFloat(row[c], 64)
		if err != nil {
			t.Fatalf("column %s: %v", c, err)
		}
		v[i] = x
	}
	return v
}

func near(a, b transform.Vec, tol float64) bool {
	for i := range 3 {
		if math.Abs(a[i]-b[i]) > tol*math.Max(1, math.Abs(b[i])) {
			return false
		}
	}
	return true
}

func TestWriteFiles(t *testing.T) {
	for _, tt := range []struct {
		name  string
		voxel transform.Vec
	}{
		{"micrometres", transform.Vec{}},
		{"target voxels", transform.Vec{0.008, 0.008, 0.04}},
	} {
		t.Run(tt.name, func(t *testing.T) {
			p := SmallParams()
			p.TargetVoxelUM = tt.voxel
			s := mustGenerate(t, p, 21)
			dir := filepath.Join(t.TempDir(), "new", "scenario")
			files, err := s.Write(dir)
			if err != nil {
				t.Fatal(err)
			}
			toTarget := func(v transform.Vec) transform.Vec {
				if tt.voxel == (transform.Vec{}) {
					return v
				}
				return transform.Vec{v[0] / tt.voxel[0], v[1] / tt.voxel[1], v[2] / tt.voxel[2]}
			}

			header, rows := readTable(t, files.Landmarks)
			wantHeader := []string{"id", "kind", "source_x", "source_y", "source_z", "target_x", "target_y", "target_z"}
			if !slices.Equal(header[:len(wantHeader)], wantHeader) {
				t.Errorf("landmarks header %v", header)
			}
			if len(rows) != len(s.Landmarks) {
				t.Fatalf("%d landmark rows for %d landmarks", len(rows), len(s.Landmarks))
			}
			for i, row := range rows {
				l := s.Landmarks[i]
				if row["id"] != l.ID || row["kind"] != l.Kind {
					t.Errorf("row %d: %v", i, row)
				}
				if !near(parseVec(t, row, "source_x", "source_y", "source_z"), l.SourceUM, 1e-9) ||
					!near(parseVec(t, row, "target_x", "target_y", "target_z"), toTarget(l.TargetUM), 1e-9) {
					t.Errorf("landmark %s written as %v", l.ID, row)
				}
			}

			header, rows = readTable(t, files.Cells)
			if !slices.Equal(header[:4], []string{"id", "x", "y", "z"}) || !slices.Contains(header, "pref_orientation_deg") || !slices.Contains(header, "osi") {
				t.Errorf("cells header %v", header)
			}
			for i, row := range rows {
				if !near(parseVec(t, row, "x", "y", "z"), s.Cells[i].SourceUM, 1e-9) {
					t.Errorf("cell %s written as %v", s.Cells[i].ID, row)
				}
			}

			header, rows = readTable(t, files.Candidates)
			if !slices.Equal(header, []string{"id", "x", "y", "z", "nucleus_volume_um3"}) {
				t.Errorf("candidates header %v", header)
			}
			if len(rows) != len(s.Candidates) {
				t.Fatalf("%d candidate rows for %d candidates", len(rows), len(s.Candidates))
			}
			for i, row := range rows {
				if !near(parseVec(t, row, "x", "y", "z"), toTarget(s.Candidates[i].TargetUM), 1e-9) {
					t.Errorf("candidate %s written as %v", s.Candidates[i].ID, row)
				}
			}

			header, rows = readTable(t, files.TruthCells)
			if !slices.Equal(header[:6], []string{"id", "true_x_um", "true_y_um", "true_z_um", "true_candidate", "inside_em"}) {
				t.Errorf("truth cells header %v", header)
			}
			for i, row := range rows {
				c := s.Cells[i]
				if row["inside_em"] != strconv.FormatBool(c.InsideEM) || row["true_candidate"] != c.TrueCandidate ||
					!near(parseVec(t, row, "true_x_um", "true_y_um", "true_z_um"), c.TrueTargetUM, 1e-9) {
					t.Errorf("truth of cell %s written as %v", c.ID, row)
				}
			}

			header, rows = readTable(t, files.TruthLandmarks)
			if !slices.Equal(header[:3], []string{"id", "wrong", "reason"}) {
				t.Errorf("truth landmarks header %v", header)
			}
			wrong := 0
			for _, row := range rows {
				if row["wrong"] == "true" {
					wrong++
				}
			}
			if wrong != p.WrongLandmarks {
				t.Errorf("%d wrong landmarks in the truth, want %d", wrong, p.WrongLandmarks)
			}

			data, err := os.ReadFile(files.Scenario)
			if err != nil {
				t.Fatal(err)
			}
			var rec struct {
				Format        string         `json:"format"`
				Version       int            `json:"version"`
				Seed          uint64         `json:"seed"`
				Params        Params         `json:"params"`
				EMBlock       Box            `json:"em_block_um"`
				TargetVoxelUM *transform.Vec `json:"target_voxel_um"`
				TrueMap       TrueMapModel   `json:"true_map"`
			}
			if err := json.Unmarshal(data, &rec); err != nil {
				t.Fatalf("scenario.json: %v", err)
			}
			if rec.Format != ScenarioFormat || rec.Version != ScenarioVersion || rec.Seed != 21 || rec.EMBlock != s.EMBlock {
				t.Errorf("scenario.json: format %q version %d seed %d block %v", rec.Format, rec.Version, rec.Seed, rec.EMBlock)
			}
			if (rec.TargetVoxelUM == nil) != (tt.voxel == transform.Vec{}) || (rec.TargetVoxelUM != nil && *rec.TargetVoxelUM != tt.voxel) {
				t.Errorf("scenario.json target voxel %v, want %v", rec.TargetVoxelUM, tt.voxel)
			}
			// The recorded map reproduces the true map exactly.
			for _, q := range fieldPoints(p.FieldUM) {
				if rec.TrueMap.Apply(q) != s.TrueMap(q) {
					t.Fatalf("the true map read back from scenario.json differs at %v µm", q)
				}
			}
			if fmt.Sprint(rec.Params) != fmt.Sprint(p) {
				t.Errorf("scenario.json params differ from the ones used")
			}

			entries, err := os.ReadDir(dir)
			if err != nil {
				t.Fatal(err)
			}
			if len(entries) != 6 {
				var names []string
				for _, e := range entries {
					names = append(names, e.Name())
				}
				t.Errorf("the directory holds %v: want exactly the six files", names)
			}
		})
	}
}

func TestWriteIsRepeatable(t *testing.T) {
	s := mustGenerate(t, SmallParams(), 4)
	a, err := s.Write(filepath.Join(t.TempDir(), "a"))
	if err != nil {
		t.Fatal(err)
	}
	b, err := s.Write(filepath.Join(t.TempDir(), "b"))
	if err != nil {
		t.Fatal(err)
	}
	for _, pair := range [][2]string{{a.Landmarks, b.Landmarks}, {a.Cells, b.Cells}, {a.Candidates, b.Candidates}, {a.TruthCells, b.TruthCells}, {a.TruthLandmarks, b.TruthLandmarks}, {a.Scenario, b.Scenario}} {
		x, _ := os.ReadFile(pair[0])
		y, _ := os.ReadFile(pair[1])
		if len(x) == 0 || !bytes.Equal(x, y) {
			t.Errorf("%s and %s differ", pair[0], pair[1])
		}
	}
	// Writing again over the same directory replaces the files whole.
	if _, err := s.Write(filepath.Dir(a.Cells)); err != nil {
		t.Fatal(err)
	}
}

func TestWriteReportsErrors(t *testing.T) {
	s := mustGenerate(t, SmallParams(), 4)
	file := filepath.Join(t.TempDir(), "plain")
	if err := os.WriteFile(file, []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Write(file); err == nil || !strings.Contains(err.Error(), "plain") {
		t.Errorf("Write into a plain file: error %v, want one naming it", err)
	}
	// A directory standing where a file must go leaves the other files
	// whole and no temporary file behind.
	dir := t.TempDir()
	if err := os.Mkdir(filepath.Join(dir, CandidatesFile), 0o755); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Write(dir); err == nil || !strings.Contains(err.Error(), CandidatesFile) {
		t.Errorf("Write over a directory: error %v, want one naming %s", err, CandidatesFile)
	}
	entries, _ := os.ReadDir(dir)
	for _, e := range entries {
		if strings.Contains(e.Name(), ".tmp-") {
			t.Errorf("temporary file %s left behind", e.Name())
		}
	}
}

// scenario.json says, for every table, the frame and units of its position
// columns, and every column it names is in that table's header.
func TestScenarioDescribesTables(t *testing.T) {
	p := SmallParams()
	p.TargetVoxelUM = transform.Vec{0.008, 0.008, 0.04}
	s := mustGenerate(t, p, 5)
	files, err := s.Write(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(files.Scenario)
	if err != nil {
		t.Fatal(err)
	}
	var rec scenarioRecord
	if err := json.Unmarshal(data, &rec); err != nil {
		t.Fatal(err)
	}
	if len(rec.Tables) != len(rec.Files) {
		t.Fatalf("%d tables described for %d files", len(rec.Tables), len(rec.Files))
	}
	units := map[string]string{}
	for _, tab := range rec.Tables {
		header, _ := readTable(t, filepath.Join(filepath.Dir(files.Scenario), tab.File))
		for _, c := range tab.Coordinates {
			for _, col := range c.Columns {
				if !slices.Contains(header, col) {
					t.Errorf("%s: column %s described but not in the header %v", tab.File, col, header)
				}
			}
			units[tab.File+":"+c.Columns[0]] = c.Frame + " " + c.Units + fmt.Sprint(c.VoxelUM)
		}
	}
	for key, want := range map[string]string{
		CandidatesFile + ":x":         "target voxel[0.008 0.008 0.04]",
		CellsFile + ":x":              "source um[]",
		LandmarksFile + ":target_x":   "target voxel[0.008 0.008 0.04]",
		TruthCellsFile + ":true_x_um": "target um[]",
	} {
		if units[key] != want {
			t.Errorf("%s: %q, want %q", key, units[key], want)
		}
	}
}
