package register

import (
	"bytes"
	"context"
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"
	"github.com/google/go-cmp/cmp/cmpopts"

	"ferry/landmarks"
	"ferry/status"
	"ferry/transform"
)

func writeFile(t *testing.T, name, text string) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// The table that WriteMappedTable writes is the one ReadMappedTable
// reads: the two must agree on the columns of docs/formats.md, and the reader
// takes the frame and units from the sidecar, from the micrometre columns
// when the sidecar is gone, and assumes the transform's units only when
// neither is there.
func TestReadMappedRoundTrip(t *testing.T) {
	cells := &landmarks.PointSet{Dim: 3, ExtraColumns: []string{"osi"}, Points: []landmarks.Point{
		{ID: "c1", Extra: []string{"0.5"}}, {ID: "c2", Extra: []string{"0.1"}}, {ID: "c3", Extra: []string{""}},
	}}
	mapped := []Mapped{
		{Pos: transform.Vec{10, 20, 30}, R95: 2.5, Status: status.OK},
		{Pos: transform.Vec{-1.25, 0, 7}, R95: 9, Status: status.Extrapolated},
		{Status: status.NoInverse},
	}
	want := []MappedCell{
		{ID: "c1", Target: transform.Vec{10, 20, 30}, Placed: true, R95: 2.5, Status: "ok"},
		{ID: "c2", Target: transform.Vec{-1.25, 0, 7}, Placed: true, R95: 9, Status: "extrapolated"},
		{ID: "c3", R95: math.NaN(), Status: "no_inverse"},
	}
	voxel := &transform.Vec{0.5, 0.25, 2}
	other := &transform.Vec{3, 3, 3}
	for _, tc := range []struct {
		name string
		// written is the voxel size the table is written in, given the
		// voxel size the reader is told.
		written, told *transform.Vec
		// edit changes the files after writing.
		edit func(t *testing.T, path string)
		// assumed is part of the note the reader must give ("" for none).
		assumed string
	}{
		{name: "sidecar, µm"},
		{name: "sidecar, voxels", written: voxel},
		// The sidecar wins over what the reader is told.
		{name: "sidecar, voxels, reader told other", written: voxel, told: other},
		{name: "no sidecar, µm columns", written: voxel, told: other, edit: removeSidecar},
		{name: "stale sidecar, µm columns", written: voxel, edit: func(t *testing.T, path string) {
			appendTo(t, path, "")
		}, assumed: "changed after it was written"},
		{name: "no sidecar, no µm columns, µm assumed", edit: func(t *testing.T, path string) {
			removeSidecar(t, path)
			dropColumns(t, path, "target_")
		}, assumed: "target positions in µm"},
		{name: "no sidecar, no µm columns, voxels assumed", written: voxel, told: voxel, edit: func(t *testing.T, path string) {
			removeSidecar(t, path)
			dropColumns(t, path, "target_")
		}, assumed: "target voxels of 0.5 × 0.25 × 2 µm"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "mapped.csv")
			if err := WriteMappedTable(context.Background(), path, Provenance{Command: "map"}, cells, mapped, FrameTarget, tc.written); err != nil {
				t.Fatal(err)
			}
			if tc.edit != nil {
				tc.edit(t, path)
			}
			m, err := ReadMappedTable(path, tc.told)
			if err != nil {
				t.Fatal(err)
			}
			if m.Dim != 3 {
				t.Errorf("dimension %d, want 3", m.Dim)
			}
			if diff := cmp.Diff(want, m.Cells, cmpopts.EquateNaNs(), cmpopts.EquateApprox(0, 1e-9)); diff != "" {
				t.Errorf("cells differ (-want +got):\n%s", diff)
			}
			if (tc.assumed == "") != (m.Assumed == "") || !strings.Contains(m.Assumed, tc.assumed) {
				t.Errorf("assumption %q, want one holding %q", m.Assumed, tc.assumed)
			}
		})
	}
}

// Cells mapped back with --inverse are refused, whether the sidecar or only
// the columns say so.
func TestReadMappedRefusesSource(t *testing.T) {
	cells := &landmarks.PointSet{Dim: 2, Points: []landmarks.Point{{ID: "c1"}}}
	mapped := []Mapped{{Pos: transform.Vec{1, 2}, R95: 1, Status: status.OK}}
	for _, drop := range []bool{false, true} {
		path := filepath.Join(t.TempDir(), "back.csv")
		if err := WriteMappedTable(context.Background(), path, Provenance{Command: "map"}, cells, mapped, FrameSource, nil); err != nil {
			t.Fatal(err)
		}
		if drop {
			removeSidecar(t, path)
		}
		if _, _, err := readMapped(path, nil); err == nil || !strings.Contains(err.Error(), "source positions") {
			t.Errorf("sidecar removed %v: error %v, want a refusal of source positions", drop, err)
		}
	}
}

func removeSidecar(t *testing.T, path string) {
	t.Helper()
	if err := os.Remove(SidecarPath(path)); err != nil {
		t.Fatal(err)
	}
}

func appendTo(t *testing.T, path, text string) {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, append(data, text+"\n"...), 0o644); err != nil {
		t.Fatal(err)
	}
}

// dropColumns rewrites the CSV at path without the columns whose names
// begin with prefix.
func dropColumns(t *testing.T, path, prefix string) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(f).ReadAll()
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	var keep []int
	for i, h := range rows[0] {
		if !strings.HasPrefix(h, prefix) {
			keep = append(keep, i)
		}
	}
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	for _, r := range rows {
		var out []string
		for _, i := range keep {
			out = append(out, r[i])
		}
		w.Write(out)
	}
	w.Flush()
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

func TestReadMapped(t *testing.T) {
	for _, tc := range []struct {
		name, text string
		want       []MappedCell
		dim        int
		err        string
	}{
		{
			name: "2-D, BOM, CRLF, comments, quotes, any order and case",
			text: "\xef\xbb\xbf# made by hand\r\nStatus,R95_UM,y,id,x\r\nok,1.5,2,\"c,1\",1\r\n# a comment\r\n\"isolated\",3,4,c2,3\r\n",
			want: []MappedCell{
				{ID: "c,1", Target: transform.Vec{1, 2}, Placed: true, R95: 1.5, Status: "ok"},
				{ID: "c2", Target: transform.Vec{3, 4}, Placed: true, R95: 3, Status: "isolated"},
			},
			dim: 2,
		},
		{name: "missing column", text: "id,x,y,z,status\nc1,1,2,3,ok\n", err: `column "r95_um": missing from the header`},
		{name: "not a number", text: "id,x,y,z,r95_um,status\nc1,1,2,abc,1,ok\n", err: `mapped.csv:2: column "z": "abc" is not a number`},
		{name: "part of a position", text: "id,x,y,z,r95_um,status\nc1,1,,3,1,ok\n", err: "some coordinates of the row are empty"},
		{name: "short row", text: "id,x,y,z,r95_um,status\nc1,1,2,3,1\n", err: `mapped.csv:2: column "status": missing: the row has 5 fields but the header has 6 columns`},
		{name: "empty id", text: "id,x,y,z,r95_um,status\n ,1,2,3,1,ok\n", err: "empty id"},
		{
			// The frame is the data's to state (sidecar, target_/source_
			// columns), never a comment's: without either, x, y, z are
			// taken as target positions.
			name: "a comment is not read for the frame",
			text: "# ferry 0.1.0 map; flags: --inverse=true\nid,x,y,z,r95_um,status\nc1,1,2,3,1,ok\n",
			want: []MappedCell{{ID: "c1", Target: transform.Vec{1, 2, 3}, Placed: true, R95: 1, Status: "ok"}},
			dim:  3,
		},
		{name: "hexadecimal", text: "id,x,y,z,r95_um,status\nc1,0x1p4,2,3,1,ok\n", err: `mapped.csv:2: column "x": "0x1p4" is not a decimal number`},
		{name: "digit separators", text: "id,x,y,z,r95_um,status\nc1,1_000,2,3,1,ok\n", err: `mapped.csv:2: column "x": "1_000" is not a number`},
		{name: "inverse, source columns", text: "id,x,y,r95_um,status,source_x_um,source_y_um\nc1,1,2,1,ok,1,2\n", err: "source positions"},
		{name: "no header", text: "# nothing\n", err: "no header row"},
		{name: "bad quotes", text: "id,x,y,z,r95_um,status\n\"c1,1,2,3,1,ok\n", err: "mapped.csv:2:"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got, dim, err := readMapped(writeFile(t, "mapped.csv", tc.text), nil)
			if tc.err != "" {
				if err == nil || !strings.Contains(err.Error(), tc.err) {
					t.Fatalf("error %v, want one holding %q", err, tc.err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if dim != tc.dim {
				t.Errorf("dimension %d, want %d", dim, tc.dim)
			}
			if diff := cmp.Diff(tc.want, got, cmpopts.EquateNaNs()); diff != "" {
				t.Errorf("cells differ (-want +got):\n%s", diff)
			}
		})
	}
}

// readMapped is ReadMappedTable's cells and dimension.
func readMapped(path string, targetVoxel *transform.Vec) ([]MappedCell, int, error) {
	m, err := ReadMappedTable(path, targetVoxel)
	if err != nil {
		return nil, 0, err
	}
	return m.Cells, m.Dim, nil
}
