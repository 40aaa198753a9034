package main

import (
	"encoding/csv"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"ferry/simulate"
)

// requirePython returns /usr/bin/python3 when it can import every module
// named, and otherwise skips the test with the reason, unless FERRY_CI is
// set (CI installs the modules and must never skip).
func requirePython(t *testing.T, modules ...string) string {
	t.Helper()
	const python = "/usr/bin/python3"
	for _, m := range modules {
		if err := exec.Command(python, "-c", "import "+m).Run(); err != nil {
			msg := "Debian's " + python + " cannot import " + m + " (apt-get install python3-" + m + "); .ci/run installs it and runs this check"
			if os.Getenv("FERRY_CI") != "" {
				t.Fatal(msg)
			}
			t.Skip(msg)
		}
	}
	return python
}

// Every CSV that ferry writes reads right with pandas.read_csv(path) and no
// other argument: the header row first, as many rows and columns as Go's
// encoding/csv finds. Outside check: pandas (Debian python3-pandas), run by
// testdata/tables/read_tables.py.
func TestPandasReadsEveryTable(t *testing.T) {
	python := requirePython(t, "pandas")
	dir := t.TempDir()
	s, err := simulate.Generate(simulate.SmallParams(), 3)
	if err != nil {
		t.Fatal(err)
	}
	files, err := s.Write(filepath.Join(dir, "sim"))
	if err != nil {
		t.Fatal(err)
	}
	tf := filepath.Join(dir, "transform.json")
	mustSucceed(t, "fit", files.Landmarks, "-o", tf)
	out := func(name string) string { return filepath.Join(dir, name) }
	mustSucceed(t, "map", tf, files.Cells, "-o", out("mapped.csv"))
	mustSucceed(t, "map", "--inverse", tf, files.Candidates, "-o", out("back.csv"))
	mustSucceed(t, "match", tf, files.Cells, files.Candidates, "-o", out("matches.csv"))
	mustSucceed(t, "suggest", files.Landmarks, files.Cells, "--n", "2", "-o", out("next.csv"))
	mustSucceed(t, "refine", files.Landmarks, files.Cells, files.Candidates, "--pairs", out("pairs.csv"), "-o", out("refined.json"))
	mustSucceed(t, "export", tf, "--mapped", out("mapped.csv"), "--target-voxel", "1,1,1", "-o", out("export"))
	tables := []string{out("mapped.csv"), out("back.csv"), out("matches.csv"), out("next.csv"), out("pairs.csv"), out("export/points.csv"),
		files.Landmarks, files.Cells, files.Candidates, files.TruthCells, files.TruthLandmarks}

	type entry struct {
		Path    string   `json:"path"`
		Columns []string `json:"columns"`
		Rows    int      `json:"rows"`
	}
	var manifest []entry
	for _, p := range tables {
		f, err := os.Open(p)
		if err != nil {
			t.Fatal(err)
		}
		recs, err := csv.NewReader(f).ReadAll()
		f.Close()
		if err != nil {
			t.Fatalf("%s: %v", p, err)
		}
		if len(recs) < 2 || recs[0][0] == "" || strings.HasPrefix(recs[0][0], "#") {
			t.Fatalf("%s: %d records, first %v: want a header row and rows", p, len(recs), recs[0])
		}
		manifest = append(manifest, entry{Path: p, Columns: recs[0], Rows: len(recs) - 1})
	}
	data, err := json.Marshal(manifest)
	if err != nil {
		t.Fatal(err)
	}
	mf := writeFile(t, out("manifest.json"), string(data))
	cmd := exec.Command(python, filepath.Join("..", "..", "testdata", "tables", "read_tables.py"), mf)
	o, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("pandas: %v\n%s", err, o)
	}
	t.Logf("%s", o)
}
