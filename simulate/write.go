package simulate

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strconv"

	"ferry/outfile"
	"ferry/transform"
)

// Generator names this package in the files it writes.
const Generator = "ferry/simulate"

// The scenario file's format name and version.
const (
	ScenarioFormat  = "ferry-simulation"
	ScenarioVersion = 1
)

// The names of the files Write makes.
const (
	LandmarksFile      = "landmarks.csv"
	CellsFile          = "cells.csv"
	CandidatesFile     = "candidates.csv"
	TruthCellsFile     = "truth_cells.csv"
	TruthLandmarksFile = "truth_landmarks.csv"
	ScenarioFile       = "scenario.json"
)

// Files holds the paths Write wrote.
type Files struct {
	Landmarks, Cells, Candidates string
	TruthCells, TruthLandmarks   string
	Scenario                     string
}

// Write writes the scenario's files into dir, creating it if need be. Each
// file is written whole or not at all (see outfile). A folder
// that holds a file of the same name as one the simulator writes, and is not
// a scenario folder written before, is refused (CheckFolder).
func (s *Scenario) Write(dir string) (Files, error) {
	return s.WriteContext(context.Background(), dir)
}

// WriteContext is Write with the run's context, which carries its output
// tracker (outfile); the writes are not cut short.
func (s *Scenario) WriteContext(ctx context.Context, dir string) (Files, error) {
	if err := CheckFolder(dir, FileNames()...); err != nil {
		return Files{}, fmt.Errorf("simulate: %w", err)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return Files{}, fmt.Errorf("simulate: %w", err)
	}
	files := Files{
		Landmarks:      filepath.Join(dir, LandmarksFile),
		Cells:          filepath.Join(dir, CellsFile),
		Candidates:     filepath.Join(dir, CandidatesFile),
		TruthCells:     filepath.Join(dir, TruthCellsFile),
		TruthLandmarks: filepath.Join(dir, TruthLandmarksFile),
		Scenario:       filepath.Join(dir, ScenarioFile),
	}
	contents, err := s.Encode()
	if err != nil {
		return Files{}, err
	}
	for _, f := range []struct {
		path string
		data []byte
	}{
		{files.Landmarks, contents[LandmarksFile]},
		{files.Cells, contents[CellsFile]},
		{files.Candidates, contents[CandidatesFile]},
		{files.TruthCells, contents[TruthCellsFile]},
		{files.TruthLandmarks, contents[TruthLandmarksFile]},
		{files.Scenario, contents[ScenarioFile]},
	} {
		if err := writeAtomic(ctx, f.path, f.data); err != nil {
			return Files{}, err
		}
	}
	return files, nil
}

// Encode renders every file of the scenario in memory, keyed by file name.
func (s *Scenario) Encode() (map[string][]byte, error) {
	out := make(map[string][]byte)
	for _, f := range []struct {
		name string
		make func() ([]byte, error)
	}{
		{LandmarksFile, s.landmarksCSV},
		{CellsFile, s.cellsCSV},
		{CandidatesFile, s.candidatesCSV},
		{TruthCellsFile, s.truthCellsCSV},
		{TruthLandmarksFile, s.truthLandmarksCSV},
		{ScenarioFile, s.scenarioJSON},
	} {
		data, err := f.make()
		if err != nil {
			return nil, fmt.Errorf("simulate: encoding %s: %w", f.name, err)
		}
		out[f.name] = data
	}
	return out, nil
}

// writeAtomic writes one file of the scenario whole or not at all, by the
// one output path every ferry command takes. Generating a scenario is not
// interruptible, so neither is writing it; ctx only carries the tracker.
func writeAtomic(ctx context.Context, path string, data []byte) error {
	if err := outfile.WriteBytes(context.WithoutCancel(ctx), path, data); err != nil {
		return fmt.Errorf("simulate: %w", err)
	}
	return nil
}

// table renders a CSV, header row first; what it holds is said in
// scenario.json (see tables).
func (s *Scenario) table(header []string, rows [][]string) ([]byte, error) {
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	if err := w.Write(header); err != nil {
		return nil, err
	}
	if err := w.WriteAll(rows); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

// formatFloat is the stable text of a coordinate: ten significant digits.
func formatFloat(v float64) string { return strconv.FormatFloat(v, 'g', 10, 64) }

// formatFloat1 is a distance for a message, to 0.1 µm.
func formatFloat1(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) }

func vecFields(v transform.Vec) []string {
	return []string{formatFloat(v[0]), formatFloat(v[1]), formatFloat(v[2])}
}

// targetOut converts a target position in µm to what the files hold: µm,
// or voxel indices when a target voxel size is set.
func (s *Scenario) targetOut(v transform.Vec) transform.Vec {
	vox := s.Params.TargetVoxelUM
	if vox == (transform.Vec{}) {
		return v
	}
	return transform.Vec{v[0] / vox[0], v[1] / vox[1], v[2] / vox[2]}
}

// coordinates describes a group of position columns of a table, with the
// JSON keys of a ferry table sidecar (register.Coordinates), which this
// package cannot import.
type coordinates struct {
	Columns []string  `json:"columns"`
	Frame   string    `json:"frame"`
	Units   string    `json:"units"`
	VoxelUM []float64 `json:"voxel_um,omitempty"`
}

// tableRecord says what one of the scenario's tables holds.
type tableRecord struct {
	File        string        `json:"file"`
	Description string        `json:"description"`
	Coordinates []coordinates `json:"coordinates"`
}

// tables describes the scenario's tables, for scenario.json: the tables
// begin with their header rows and say nothing of themselves.
func (s *Scenario) tables() []tableRecord {
	xyz := func(prefix, suffix string) []string {
		return []string{prefix + "x" + suffix, prefix + "y" + suffix, prefix + "z" + suffix}
	}
	um := func(cols []string, frame string) coordinates {
		return coordinates{Columns: cols, Frame: frame, Units: "um"}
	}
	target := func(cols []string) coordinates {
		vox := s.Params.TargetVoxelUM
		if vox == (transform.Vec{}) {
			return um(cols, "target")
		}
		return coordinates{Columns: cols, Frame: "target", Units: "voxel", VoxelUM: vox[:]}
	}
	return []tableRecord{
		{LandmarksFile, "landmark pairs", []coordinates{um(xyz("source_", ""), "source"), target(xyz("target_", ""))}},
		{CellsFile, "imaged cells in source space", []coordinates{um(xyz("", ""), "source")}},
		{CandidatesFile, "EM nucleus centroids in target space", []coordinates{target(xyz("", ""))}},
		{TruthCellsFile, "truth of the imaged cells", []coordinates{um(xyz("true_", "_um"), "target"), um(xyz("true_source_", "_um"), "source")}},
		{TruthLandmarksFile, "truth of the landmark pairs", []coordinates{um(xyz("true_source_", "_um"), "source"), um(xyz("true_target_", "_um"), "target")}},
	}
}

func (s *Scenario) landmarksCSV() ([]byte, error) {
	header := []string{"id", "kind", "source_x", "source_y", "source_z", "target_x", "target_y", "target_z", "note"}
	rows := make([][]string, 0, len(s.Landmarks))
	for _, l := range s.Landmarks {
		row := []string{l.ID, l.Kind}
		row = append(row, vecFields(l.SourceUM)...)
		row = append(row, vecFields(s.targetOut(l.TargetUM))...)
		rows = append(rows, append(row, l.Note))
	}
	return s.table(header, rows)
}

func (s *Scenario) cellsCSV() ([]byte, error) {
	header := []string{"id", "x", "y", "z", "plane", "pref_orientation_deg", "osi"}
	rows := make([][]string, 0, len(s.Cells))
	for _, c := range s.Cells {
		row := []string{c.ID}
		row = append(row, vecFields(c.SourceUM)...)
		rows = append(rows, append(row, strconv.Itoa(c.Plane), formatFloat(c.PrefOrientationDeg), formatFloat(c.OSI)))
	}
	return s.table(header, rows)
}

func (s *Scenario) candidatesCSV() ([]byte, error) {
	header := []string{"id", "x", "y", "z", "nucleus_volume_um3"}
	rows := make([][]string, 0, len(s.Candidates))
	for _, c := range s.Candidates {
		row := []string{c.ID}
		row = append(row, vecFields(s.targetOut(c.TargetUM))...)
		rows = append(rows, append(row, formatFloat(c.NucleusVolumeUM3)))
	}
	return s.table(header, rows)
}

func (s *Scenario) truthCellsCSV() ([]byte, error) {
	header := []string{"id", "true_x_um", "true_y_um", "true_z_um", "true_candidate", "inside_em", "true_source_x_um", "true_source_y_um", "true_source_z_um"}
	rows := make([][]string, 0, len(s.Cells))
	for _, c := range s.Cells {
		row := []string{c.ID}
		row = append(row, vecFields(c.TrueTargetUM)...)
		row = append(row, c.TrueCandidate, strconv.FormatBool(c.InsideEM))
		rows = append(rows, append(row, vecFields(c.TrueSourceUM)...))
	}
	return s.table(header, rows)
}

func (s *Scenario) truthLandmarksCSV() ([]byte, error) {
	header := []string{"id", "wrong", "reason", "true_source_x_um", "true_source_y_um", "true_source_z_um", "true_target_x_um", "true_target_y_um", "true_target_z_um"}
	rows := make([][]string, 0, len(s.Landmarks))
	for _, l := range s.Landmarks {
		row := []string{l.ID, strconv.FormatBool(l.Wrong), l.Reason}
		row = append(row, vecFields(l.TrueSourceUM)...)
		rows = append(rows, append(row, vecFields(l.TrueTargetUM)...))
	}
	return s.table(header, rows)
}

// scenarioRecord is the layout of scenario.json.
type scenarioRecord struct {
	Format    string `json:"format"`
	Version   int    `json:"version"`
	Generator string `json:"generator"`
	Seed      uint64 `json:"seed"`
	Params    Params `json:"params"`
	// EMBlockUM is the box of target space the EM dataset covers.
	EMBlockUM Box `json:"em_block_um"`
	// Voxel sizes in µm per voxel; null where the coordinates are µm.
	SourceVoxelUM *transform.Vec `json:"source_voxel_um"`
	TargetVoxelUM *transform.Vec `json:"target_voxel_um"`
	TrueMap       TrueMapModel   `json:"true_map"`
	Counts        scenarioCounts `json:"counts"`
	Files         []string       `json:"files"`
	// Tables say what each table holds and the frame and units of its
	// position columns.
	Tables []tableRecord `json:"tables"`
}

type scenarioCounts struct {
	Somata          int `json:"somata"`
	VesselSegments  int `json:"vessel_segments"`
	BranchPoints    int `json:"branch_points"`
	Cells           int `json:"cells"`
	CellsInsideEM   int `json:"cells_inside_em"`
	Candidates      int `json:"candidates"`
	NonNeuronal     int `json:"non_neuronal_candidates"`
	Landmarks       int `json:"landmarks"`
	WrongLandmarks  int `json:"wrong_landmarks"`
	VesselLandmarks int `json:"vessel_landmarks"`
	SomaLandmarks   int `json:"soma_landmarks"`
}

func (s *Scenario) scenarioJSON() ([]byte, error) {
	rec := scenarioRecord{
		Format:    ScenarioFormat,
		Version:   ScenarioVersion,
		Generator: Generator,
		Seed:      s.Seed,
		Params:    s.Params,
		EMBlockUM: s.EMBlock,
		TrueMap:   s.Map,
		Files:     []string{LandmarksFile, CellsFile, CandidatesFile, TruthCellsFile, TruthLandmarksFile},
		Tables:    s.tables(),
	}
	if v := s.Params.TargetVoxelUM; v != (transform.Vec{}) {
		rec.TargetVoxelUM = &v
	}
	c := &rec.Counts
	c.Somata = len(s.Somata)
	c.VesselSegments = len(s.Vessels)
	c.BranchPoints = len(s.BranchPoints)
	c.Cells = len(s.Cells)
	for _, cell := range s.Cells {
		if cell.InsideEM {
			c.CellsInsideEM++
		}
	}
	c.Candidates = len(s.Candidates)
	for _, cand := range s.Candidates {
		if cand.Kind != Neuron {
			c.NonNeuronal++
		}
	}
	c.Landmarks = len(s.Landmarks)
	for _, l := range s.Landmarks {
		if l.Wrong {
			c.WrongLandmarks++
		}
		if l.Kind == "vessel" {
			c.VesselLandmarks++
		} else {
			c.SomaLandmarks++
		}
	}
	data, err := json.MarshalIndent(rec, "", "  ")
	if err != nil {
		return nil, err
	}
	return append(data, '\n'), nil
}
