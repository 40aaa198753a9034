package export

import (
	"context"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"ferry/register"
	"ferry/transform"
)

// needOutside skips a test whose outside tool is missing, with the reason,
// unless FERRY_CI is set: CI installs every tool and must never skip.
func needOutside(t *testing.T, ok bool, msg string) {
	t.Helper()
	if ok {
		return
	}
	if os.Getenv("FERRY_CI") != "" {
		t.Fatal(msg)
	}
	t.Skip(msg)
}

// specDir is the OME-NGFF specification's folder: FERRY_NGFF_SPEC, or
// ../shared/reference/ngff-spec beside the repository.
func specDir() string {
	if d := os.Getenv("FERRY_NGFF_SPEC"); d != "" {
		return d
	}
	return filepath.Join("..", "..", "..", "shared", "reference", "ngff-spec")
}

// exportForOutside writes an export of a 3-D spline and the points at which
// the outside readers apply it.
func exportForOutside(t *testing.T, dim int) (dir, pointsPath string, fd *Field, s *transform.Spline, pts []transform.Vec) {
	t.Helper()
	s = testSpline(t, dim)
	file := &register.Registration{Transform: s}
	dir = filepath.Join(t.TempDir(), "export")
	res, err := Write(context.Background(), dir, file, Options{Grid: GridOptions{Spacing: transform.Vec{10, 12, 15}, Margin: 20}})
	if err != nil {
		t.Fatal(err)
	}
	pts = res.Field.Grid.RandomPoints(200, 77)
	data, err := json.Marshal(pts)
	if err != nil {
		t.Fatal(err)
	}
	pointsPath = filepath.Join(t.TempDir(), "points.json")
	if err := os.WriteFile(pointsPath, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return dir, pointsPath, res.Field, s, pts
}

// compare checks points mapped by an outside reader: equal to ferry's own
// interpolation of the same field to float rounding, and within the
// sampling error of the spline.
func compare(t *testing.T, who string, got [][]float64, pts []transform.Vec, own func(transform.Vec) transform.Vec, s *transform.Spline, bound float64) {
	t.Helper()
	if len(got) != len(pts) {
		t.Fatalf("%s mapped %d points of %d", who, len(got), len(pts))
	}
	worst := 0.0
	for i, p := range pts {
		var g transform.Vec
		copy(g[:], got[i])
		if e := g.Sub(own(p)).Norm(); e > 1e-6*(1+g.Norm()) {
			t.Errorf("%s maps %v to %v, ferry's interpolation to %v", who, p, g, own(p))
		}
		worst = max(worst, g.Sub(s.Apply(p)).Norm())
	}
	if worst > bound {
		t.Errorf("%s: largest distance from the spline %g µm, above the sampling error bound %g µm", who, worst, bound)
	}
	t.Logf("%s: %d points, largest distance from the spline %.4g µm (bound %.4g µm)", who, len(pts), worst, bound)
}

// The OME-Zarr metadata validate against the OME-NGFF 0.6 JSON schemas
// (python3-jsonschema, the specification's schemas and conformance cases),
// and tifffile with scipy.ndimage.map_coordinates applies the TIFF field as
// ferry does. Outside check: OME-NGFF specification 0.6 (ome/ngff-spec);
// Debian python3-jsonschema, python3-tifffile, python3-scipy.
func TestOutsidePythonReadsExport(t *testing.T) {
	const python = "/usr/bin/python3"
	err := exec.Command(python, "-c", "import jsonschema, tifffile, scipy").Run()
	needOutside(t, err == nil, python+" cannot import jsonschema, tifffile and scipy (apt-get install python3-jsonschema python3-tifffile python3-scipy); .ci/run installs them")
	_, err = os.Stat(filepath.Join(specDir(), "schemas", "scene.schema"))
	needOutside(t, err == nil, "no OME-NGFF specification at "+specDir()+" (set FERRY_NGFF_SPEC)")
	for _, dim := range []int{2, 3} {
		dir, pointsPath, fd, s, pts := exportForOutside(t, dim)
		out, err := exec.Command(python, filepath.Join("..", "..", "testdata", "export", "check_export.py"), specDir(), dir, pointsPath).Output()
		if err != nil {
			var stderr []byte
			if ee, ok := err.(*exec.ExitError); ok {
				stderr = ee.Stderr
			}
			t.Fatalf("%d-D: check_export.py: %v\n%s", dim, err, stderr)
		}
		var res struct {
			Cases  int         `json:"schema_cases"`
			Points [][]float64 `json:"tiff_points"`
		}
		if err := json.Unmarshal(out, &res); err != nil {
			t.Fatalf("%v: %s", err, out)
		}
		t.Logf("%d-D: the validator agreed with %d conformance cases of the specification", dim, res.Cases)
		_, seq := fd.Errors(s, fd.Grid.RandomPoints(4000, 5))
		compare(t, "tifffile + scipy", res.Points, pts, fd.ApplyTotal, s, 2*seq.MaxUM)
	}
}

// An independent Zarr reader, the npm package zarrita, reads the store and
// applies the sequence its metadata describe (testdata/export/apply_zarr.mjs)
// as ferry does. FERRY_ZARRITA_DIR names a folder whose node_modules holds
// zarrita (.ci/run installs it).
func TestOutsideZarritaReadsExport(t *testing.T) {
	modules := os.Getenv("FERRY_ZARRITA_DIR")
	_, err := os.Stat(filepath.Join(modules, "node_modules", "zarrita"))
	needOutside(t, modules != "" && err == nil, "set FERRY_ZARRITA_DIR to a folder with node_modules/zarrita (npm install zarrita); .ci/run does")
	node, err := exec.LookPath("node")
	needOutside(t, err == nil, "no node on PATH")
	run := t.TempDir()
	if err := os.Symlink(filepath.Join(modules, "node_modules"), filepath.Join(run, "node_modules")); err != nil {
		t.Fatal(err)
	}
	script, err := os.ReadFile(filepath.Join("..", "..", "testdata", "export", "apply_zarr.mjs"))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(run, "apply_zarr.mjs"), script, 0o644); err != nil {
		t.Fatal(err)
	}
	for _, dim := range []int{2, 3} {
		dir, pointsPath, fd, s, pts := exportForOutside(t, dim)
		cmd := exec.Command(node, "apply_zarr.mjs", filepath.Join(dir, FieldZarrFile), pointsPath)
		cmd.Dir = run
		out, err := cmd.Output()
		if err != nil {
			var stderr []byte
			if ee, ok := err.(*exec.ExitError); ok {
				stderr = ee.Stderr
			}
			t.Fatalf("%d-D: apply_zarr.mjs: %v\n%s", dim, err, stderr)
		}
		var res struct {
			Version string      `json:"zarrita"`
			Shape   []int       `json:"shape"`
			Points  [][]float64 `json:"points"`
		}
		if err := json.Unmarshal(out, &res); err != nil {
			t.Fatalf("%v: %s", err, out)
		}
		if len(res.Shape) != dim+1 || res.Shape[0] != dim {
			t.Errorf("%d-D: zarrita read an array of shape %v", dim, res.Shape)
		}
		t.Logf("%d-D: zarrita %s read an array of shape %v", dim, res.Version, res.Shape)
		_, seq := fd.Errors(s, fd.Grid.RandomPoints(4000, 5))
		compare(t, "zarrita", res.Points, pts, fd.ApplySequence, s, 2*seq.MaxUM)
	}
}
