package report

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
	"ferry/register"
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

// The table that register.WriteMappedTable writes is the one ReadMapped
// reads: the two must agree on the columns of the contract, and the reader
// takes the frame and units from the sidecar, from the micrometre columns
// when the sidecar is gone, and assumes the transform's units only when
// neither is there.
func TestReadMappedRoundTrip(t *testing.T) {
	cells := &landmarks.PointSet{Dim: 3, ExtraColumns: []string{"osi"}, Points: []landmarks.Point{
		{ID: "c1", Extra: []string{"0.5"}}, {ID: "c2", Extra: []string{"0.1"}}, {ID: "c3", Extra: []string{""}},
	}}
	mapped := []register.Mapped{
		{Pos: transform.Vec{10, 20, 30}, R95: 2.5, Status: status.OK},
		{Pos: transform.Vec{-1.25, 0, 7}, R95: 9, Status: status.Extrapolated},
		{Status: status.NoInverse},
	}
	want := []Cell{
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
			if err := register.WriteMappedTable(context.Background(), path, register.Provenance{Command: "map"}, cells, mapped, register.FrameTarget, tc.written); err != nil {
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
	mapped := []register.Mapped{{Pos: transform.Vec{1, 2}, R95: 1, Status: status.OK}}
	for _, drop := range []bool{false, true} {
		path := filepath.Join(t.TempDir(), "back.csv")
		if err := register.WriteMappedTable(context.Background(), path, register.Provenance{Command: "map"}, cells, mapped, register.FrameSource, nil); err != nil {
			t.Fatal(err)
		}
		if drop {
			removeSidecar(t, path)
		}
		if _, _, err := ReadMapped(path, nil); err == nil || !strings.Contains(err.Error(), "source positions") {
			t.Errorf("sidecar removed %v: error %v, want a refusal of source positions", drop, err)
		}
	}
}

func removeSidecar(t *testing.T, path string) {
	t.Helper()
	if err := os.Remove(register.SidecarPath(path)); err != nil {
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
		want       []Cell
		dim        int
		err        string
	}{
		{
			name: "2-D, BOM, CRLF, comments, quotes, any order and case",
			text: "\xef\xbb\xbf# made by hand\r\nStatus,R95_UM,y,id,x\r\nok,1.5,2,\"c,1\",1\r\n# a comment\r\n\"isolated\",3,4,c2,3\r\n",
			want: []Cell{
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
			want: []Cell{{ID: "c1", Target: transform.Vec{1, 2, 3}, Placed: true, R95: 1, Status: "ok"}},
			dim:  3,
		},
		{name: "hexadecimal", text: "id,x,y,z,r95_um,status\nc1,0x1p4,2,3,1,ok\n", err: `mapped.csv:2: column "x": "0x1p4" is not a decimal number`},
		{name: "digit separators", text: "id,x,y,z,r95_um,status\nc1,1_000,2,3,1,ok\n", err: `mapped.csv:2: column "x": "1_000" is not a number`},
		{name: "inverse, source columns", text: "id,x,y,r95_um,status,source_x_um,source_y_um\nc1,1,2,1,ok,1,2\n", err: "source positions"},
		{name: "no header", text: "# nothing\n", err: "no header row"},
		{name: "bad quotes", text: "id,x,y,z,r95_um,status\n\"c1,1,2,3,1,ok\n", err: "mapped.csv:2:"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got, dim, err := ReadMapped(writeFile(t, "mapped.csv", tc.text), nil)
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

func TestReadMatches(t *testing.T) {
	nan := math.NaN()
	for _, tc := range []struct {
		name, text string
		want       []Match
		err        string
	}{
		{
			name: "the contract's columns with extras",
			text: "# ferry match\nid,candidate,p_match,distance_um,runner_up,p_runner_up,status,osi\n" +
				"c1,n7,0.97,1.5,n8,0.02,matched,0.3\nc2,n9,0.52,3.25,n4,0.44,Ambiguous,0.1\nc3,,,,,,unmatched,\n",
			want: []Match{
				{ID: "c1", Candidate: "n7", PMatch: 0.97, DistanceUM: 1.5, RunnerUp: "n8", PRunnerUp: 0.02, PNone: nan, R95: nan, Status: "matched"},
				{ID: "c2", Candidate: "n9", PMatch: 0.52, DistanceUM: 3.25, RunnerUp: "n4", PRunnerUp: 0.44, PNone: nan, R95: nan, Status: "ambiguous"},
				{ID: "c3", PMatch: nan, DistanceUM: nan, PRunnerUp: nan, PNone: nan, R95: nan, Status: "unmatched"},
			},
		},
		{
			name: "with the probability of no counterpart",
			text: "id,candidate,p_match,distance_um,runner_up,p_runner_up,status,p_none\n" +
				"c1,n7,0.74,9.7,,0,ambiguous,0.26\n",
			want: []Match{
				{ID: "c1", Candidate: "n7", PMatch: 0.74, DistanceUM: 9.7, PRunnerUp: 0, PNone: 0.26, R95: nan, Status: "ambiguous"},
			},
		},
		{
			name: "with target coordinates in voxels",
			text: "id,candidate,p_match,distance_um,runner_up,p_runner_up,status,p_none,cell_x_vox,cell_y_vox,cell_z_vox,candidate_x_vox,candidate_y_vox,candidate_z_vox,r95_um\n" +
				"c1,n7,0.74,9.7,,0,ambiguous,0.26,1,2,3,4,5,6,2.5\nc2,,,,,0,unmatched,0.99,7,8,9,,,,3\n",
			want: []Match{
				{ID: "c1", Candidate: "n7", PMatch: 0.74, DistanceUM: 9.7, PRunnerUp: 0, PNone: 0.26, R95: 2.5, Status: "ambiguous",
					Cell: transform.Vec{1, 2, 3}, CandidatePos: transform.Vec{4, 5, 6}, CellPlaced: true, CandidatePlaced: true, InVoxels: true},
				{ID: "c2", PMatch: nan, DistanceUM: nan, PRunnerUp: 0, PNone: 0.99, R95: 3, Status: "unmatched",
					Cell: transform.Vec{7, 8, 9}, CandidatePos: transform.Vec{nan, nan, nan}, CellPlaced: true, InVoxels: true},
			},
		},
		{name: "unknown status", text: "id,candidate,p_match,distance_um,runner_up,p_runner_up,status\nc1,n1,1,1,,0,maybe\n", err: `matches.csv:2: column "status": "maybe" is not a match status`},
		{name: "missing runner-up", text: "id,candidate,p_match,distance_um,p_runner_up,status\n", err: `column "runner_up": missing`},
		{name: "infinite", text: "id,candidate,p_match,distance_um,runner_up,p_runner_up,status\nc1,n1,inf,1,,0,matched\n", err: `matches.csv:2: column "p_match": "inf" is infinite: want a finite number`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got, err := ReadMatches(writeFile(t, "matches.csv", tc.text))
			if tc.err != "" {
				if err == nil || !strings.Contains(err.Error(), tc.err) {
					t.Fatalf("error %v, want one holding %q", err, tc.err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if diff := cmp.Diff(tc.want, got, cmpopts.EquateNaNs()); diff != "" {
				t.Errorf("matches differ (-want +got):\n%s", diff)
			}
		})
	}
	if _, err := ReadMatches(filepath.Join(t.TempDir(), "absent.csv")); err == nil || !strings.Contains(err.Error(), "absent.csv: cannot open: no such file") {
		t.Errorf("absent file: error %v", err)
	}
}
