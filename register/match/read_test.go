package match

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"
	"github.com/google/go-cmp/cmp/cmpopts"

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

func TestReadMatches(t *testing.T) {
	nan := math.NaN()
	for _, tc := range []struct {
		name, text string
		want       []Row
		err        string
	}{
		{
			name: "the contract's columns with extras",
			text: "# ferry match\nid,candidate,p_match,distance_um,runner_up,p_runner_up,status,osi\n" +
				"c1,n7,0.97,1.5,n8,0.02,matched,0.3\nc2,n9,0.52,3.25,n4,0.44,Ambiguous,0.1\nc3,,,,,,unmatched,\n",
			want: []Row{
				{ID: "c1", Candidate: "n7", PMatch: 0.97, DistanceUM: 1.5, RunnerUp: "n8", PRunnerUp: 0.02, PNone: nan, R95: nan, Status: "matched"},
				{ID: "c2", Candidate: "n9", PMatch: 0.52, DistanceUM: 3.25, RunnerUp: "n4", PRunnerUp: 0.44, PNone: nan, R95: nan, Status: "ambiguous"},
				{ID: "c3", PMatch: nan, DistanceUM: nan, PRunnerUp: nan, PNone: nan, R95: nan, Status: "unmatched"},
			},
		},
		{
			name: "with the probability of no counterpart",
			text: "id,candidate,p_match,distance_um,runner_up,p_runner_up,status,p_none\n" +
				"c1,n7,0.74,9.7,,0,ambiguous,0.26\n",
			want: []Row{
				{ID: "c1", Candidate: "n7", PMatch: 0.74, DistanceUM: 9.7, PRunnerUp: 0, PNone: 0.26, R95: nan, Status: "ambiguous"},
			},
		},
		{
			name: "with target coordinates in voxels",
			text: "id,candidate,p_match,distance_um,runner_up,p_runner_up,status,p_none,cell_x_vox,cell_y_vox,cell_z_vox,candidate_x_vox,candidate_y_vox,candidate_z_vox,r95_um\n" +
				"c1,n7,0.74,9.7,,0,ambiguous,0.26,1,2,3,4,5,6,2.5\nc2,,,,,0,unmatched,0.99,7,8,9,,,,3\n",
			want: []Row{
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
			got, err := ReadMatchesTable(writeFile(t, "matches.csv", tc.text))
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
	if _, err := ReadMatchesTable(filepath.Join(t.TempDir(), "absent.csv")); err == nil || !strings.Contains(err.Error(), "absent.csv: cannot open: no such file") {
		t.Errorf("absent file: error %v", err)
	}
}
