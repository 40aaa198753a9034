package register

import (
	"context"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"ferry/landmarks"
	"ferry/status"
	"ferry/transform"
)

// PositionUnits takes the units from the sidecar, refuses the other frame,
// and assumes what it is told, saying so, when the sidecar is missing or
// stale.
func TestPositionUnits(t *testing.T) {
	cells := &landmarks.PointSet{Dim: 3, Points: []landmarks.Point{{ID: "c1"}}}
	mapped := []Mapped{{Pos: transform.Vec{1, 2, 3}, R95: 1, Status: status.OK}}
	voxel := &transform.Vec{0.5, 0.5, 2}
	told := &transform.Vec{9, 9, 9}
	dir := t.TempDir()
	path := filepath.Join(dir, "mapped.csv")
	if err := WriteMappedTable(context.Background(), path, Provenance{Command: "map"}, cells, mapped, FrameTarget, voxel); err != nil {
		t.Fatal(err)
	}
	got, note, err := PositionUnits(path, FrameTarget, told)
	if err != nil || note != "" || got == nil || *got != *voxel {
		t.Errorf("with the sidecar: %v, %q, %v; want %v and no note", got, note, err, *voxel)
	}
	if _, _, err := PositionUnits(path, FrameSource, told); err == nil || !strings.Contains(err.Error(), "target positions") {
		t.Errorf("the other frame: error %v", err)
	}
	// A table changed after writing: the sidecar is stale and ignored.
	if err := os.WriteFile(path, []byte("id,x,y,z,r95_um,status\nc1,1,2,3,1,ok\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	got, note, err = PositionUnits(path, FrameTarget, told)
	if err != nil || got != told || !strings.Contains(note, "changed after it was written") || !strings.Contains(note, "voxels of 9 × 9 × 9 µm") {
		t.Errorf("stale sidecar: %v, %q, %v", got, note, err)
	}
	if err := os.Remove(SidecarPath(path)); err != nil {
		t.Fatal(err)
	}
	got, note, err = PositionUnits(path, FrameTarget, nil)
	if err != nil || got != nil || !strings.Contains(note, "no sidecar") || !strings.Contains(note, "in µm") {
		t.Errorf("no sidecar: %v, %q, %v", got, note, err)
	}
}

// A table and its sidecar appear together or not at all.
func TestWriteTableWholeOrNothing(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "out.csv")
	boom := errors.New("boom")
	err := WriteTable(context.Background(), path, Provenance{Command: "x"}, nil, func(w io.Writer) error {
		w.Write([]byte("id\n"))
		return boom
	})
	if !errors.Is(err, boom) {
		t.Fatalf("error %v, want boom", err)
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 0 {
		t.Errorf("folder holds %v after a failed write", entries)
	}
	if err := WriteTable(context.Background(), path, Provenance{Command: "x"}, nil, func(w io.Writer) error {
		_, err := w.Write([]byte("id\na\n"))
		return err
	}); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	side, err := ReadSidecar(path, data)
	if err != nil {
		t.Fatal(err)
	}
	if side.Table != "out.csv" || side.Command != "x" || side.Program != "ferry "+Version {
		t.Errorf("sidecar %+v", side)
	}
}
