package main

import (
	"bufio"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"ferry/register"
)

// spoilLandmark moves the target of landmark id by 40 µm along x.
func spoilLandmark(t *testing.T, text, id string) string {
	t.Helper()
	lines := strings.Split(text, "\n")
	for i, line := range lines {
		f := strings.Split(line, ",")
		if f[0] != id {
			continue
		}
		var x float64
		if _, err := fmt.Sscan(f[5], &x); err != nil {
			t.Fatal(err)
		}
		f[5] = fmt.Sprintf("%.4f", x+40)
		lines[i] = strings.Join(f, ",")
		return strings.Join(lines, "\n")
	}
	t.Fatalf("no landmark %s", id)
	return ""
}

// TestExitStatuses runs the commands on good inputs: exit 0 when done and
// passed, 3 when done but a quality check failed.
func TestExitStatuses(t *testing.T) {
	fx := newFixture(t)
	dir := t.TempDir()
	spoilt := writeFile(t, filepath.Join(dir, "spoilt.csv"), spoilLandmark(t, landmarkCSV(40), "L17"))
	tests := []struct {
		name string
		args []string
		code int
		// stdout holds every one of these.
		stdout []string
	}{
		{"version", []string{"version"}, exitOK, []string{"ferry " + register.Version}},
		{"fit", []string{"fit", fx.landmarks, "-o", filepath.Join(dir, "t.json")}, exitOK, []string{"Chosen: tps", "Wrote"}},
		{"fit affine", []string{"fit", fx.landmarks, "--model", "affine", "-o", filepath.Join(dir, "a.json")}, exitOK, []string{"affine"}},
		{"fit, excluding two", []string{"fit", fx.landmarks, "--exclude", "L03, L07", "-o", filepath.Join(dir, "x.json")}, exitOK, []string{"over 38 landmarks"}},
		{"fit, voxels and sds", []string{"fit", fx.landmarks, "--source-voxel", "1,1,1", "--target-voxel", "0.5,0.5,0.5", "--source-sd", "0.3,0.3,0.5", "--target-sd", "0.2,0.2,0.2", "-o", filepath.Join(dir, "v.json")}, exitOK, nil},
		{"fit, flagged landmark still fits", []string{"fit", spoilt, "-o", filepath.Join(dir, "s.json")}, exitOK, []string{"look wrong", "L17"}},
		{"check passes", []string{"check", fx.landmarks}, exitOK, []string{"No landmark looks wrong"}},
		{"check --json passes", []string{"check", fx.landmarks, "--json"}, exitOK, []string{`"loo_error_um"`}},
		{"check flags a spoilt landmark", []string{"check", spoilt}, exitQuality, []string{"L17"}},
		{"check --json flags it", []string{"check", spoilt, "--json"}, exitQuality, []string{`"flagged": [`, `"L17"`}},
		{"check without it passes", []string{"check", spoilt, "--exclude", "L17"}, exitOK, nil},
		{"check --max-error fails", []string{"check", fx.landmarks, "--max-error", "0.5"}, exitQuality, []string{"exceeds --max-error"}},
		{"check --max-error passes", []string{"check", fx.landmarks, "--max-error", "50"}, exitOK, nil},
		{"map", []string{"map", fx.transform, fx.cells, "-o", filepath.Join(dir, "m.csv")}, exitOK, []string{"Mapped 30 cells"}},
		{"map --inverse --cell-sd", []string{"map", fx.transform, fx.cells, "--inverse", "--cell-sd", "1,1,2", "-o", filepath.Join(dir, "mi.csv")}, exitOK, []string{"Mapped 30 cells"}},
		{"simulate", []string{"simulate", filepath.Join(dir, "sim"), "--seed", "5"}, exitOK, []string{"landmarks.csv", "invivo_stack.tif"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			o := ferry(t, tc.args...)
			if o.code != tc.code {
				t.Fatalf("exit %d, want %d\n%v", o.code, tc.code, o)
			}
			if o.stderr != "" {
				t.Errorf("stderr: %s", o.stderr)
			}
			for _, w := range tc.stdout {
				if !strings.Contains(o.stdout, w) {
					t.Errorf("stdout does not say %q:\n%s", w, o.stdout)
				}
			}
		})
	}
}

// TestImageCommands resamples and overlays the scenario's images.
func TestImageCommands(t *testing.T) {
	sc := newScenarioFixture(t)
	dir := t.TempDir()
	mapped := filepath.Join(dir, "mapped.csv")
	mustSucceed(t, "map", sc.transform, sc.files.Cells, "-o", mapped)
	out := filepath.Join(dir, "resampled.tif")
	o := mustSucceed(t, append([]string{"resample", sc.transform, sc.stack, "--like", sc.plane, "-o", out}, sc.imageFlags()...)...)
	if strings.Contains(o.stdout, "100.0 % outside") {
		t.Errorf("the resampled plane misses the stack: %s", o.stdout)
	}
	if _, err := os.Stat(out); err != nil {
		t.Error(err)
	}
	png := filepath.Join(dir, "overlay.png")
	o = mustSucceed(t, append([]string{"overlay", sc.transform, sc.stack, sc.plane, "--mapped", mapped, "-o", png}, sc.imageFlags()...)...)
	if !strings.Contains(o.stdout, "cells marked") {
		t.Errorf("overlay said %s", o.stdout)
	}
	// The matches table marks the same cells, from its cell_x_um … columns.
	matches := filepath.Join(dir, "matches.csv")
	mustSucceed(t, "match", sc.transform, sc.files.Cells, sc.files.Candidates, "-o", matches)
	fromMatches := mustSucceed(t, append([]string{"overlay", sc.transform, sc.stack, sc.plane, "--mapped", matches, "-o", png}, sc.imageFlags()...)...)
	count := regexp.MustCompile(`(\d+) cells marked`)
	a, b := count.FindStringSubmatch(o.stdout), count.FindStringSubmatch(fromMatches.stdout)
	if a == nil || b == nil || a[1] != b[1] || a[1] == "0" {
		t.Errorf("overlay of mapped cells said %q, of matches %q", o.stdout, fromMatches.stdout)
	}
}

// nonFinite matches the ways Go and other programs spell a number that is
// not finite, as a whole field.
var nonFinite = regexp.MustCompile(`(?i)(^|[,:\[\s"])[+-]?(nan|inf|infinity)($|[,\]\s"])`)

// TestOutputsHoldOnlyFiniteNumbers runs every command that writes numbers,
// in every direction, and wants no NaN or Inf anywhere in what it wrote.
func TestOutputsHoldOnlyFiniteNumbers(t *testing.T) {
	fx := newFixture(t)
	sc := newScenarioFixture(t)
	dir := t.TempDir()
	var files []string
	out := func(name string) string {
		p := filepath.Join(dir, name)
		files = append(files, p)
		return p
	}
	for _, model := range []string{"translation", "rigid", "similarity", "affine", "tps"} {
		tr := out(model + ".json")
		mustSucceed(t, "fit", fx.landmarks, "--model", model, "-o", tr)
		mustSucceed(t, "map", tr, fx.cells, "-o", out(model+"-mapped.csv"))
		mustSucceed(t, "map", tr, fx.cells, "--inverse", "--cell-sd", "0.5,0.5,1", "-o", out(model+"-inverse.csv"))
		o := mustSucceed(t, "check", fx.landmarks, "--model", model, "--json")
		if err := os.WriteFile(out(model+"-check.json"), []byte(o.stdout), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	// Cells far outside the landmarks, where the spline extrapolates.
	far := writeFile(t, filepath.Join(dir, "far.csv"), "id,x,y,z\nf1,1e6,-1e6,5e5\nf2,-3000,0,0\nf3,0,0,1e8\n")
	mustSucceed(t, "map", filepath.Join(dir, "tps.json"), far, "-o", out("far-mapped.csv"))
	mustSucceed(t, "map", filepath.Join(dir, "tps.json"), far, "--inverse", "-o", out("far-inverse.csv"))
	files = append(files, sc.transform)
	mustSucceed(t, "map", sc.transform, sc.files.Cells, "-o", out("scenario-mapped.csv"))
	for _, f := range files {
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		sc := bufio.NewScanner(strings.NewReader(string(data)))
		sc.Buffer(nil, 1<<24)
		for n := 1; sc.Scan(); n++ {
			if nonFinite.MatchString(sc.Text()) {
				t.Errorf("%s:%d holds a number that is not finite: %s", filepath.Base(f), n, sc.Text())
			}
		}
	}
}

// TestExtremeNumbers gives degenerate and extreme coordinates and wants a
// clear refusal every time, with nothing written.
func TestExtremeNumbers(t *testing.T) {
	fx := newFixture(t)
	var huge, tiny, equal strings.Builder
	huge.WriteString(pairHeader)
	tiny.WriteString(pairHeader)
	equal.WriteString(pairHeader)
	for i, line := range strings.Split(strings.TrimSpace(goodPairRows), "\n") {
		f := strings.Split(line, ",")
		scaled := func(scale string) string {
			g := append([]string(nil), f...)
			for k := 2; k < 8; k++ {
				g[k] += scale
			}
			return strings.Join(g, ",")
		}
		huge.WriteString(scaled("e305") + "\n")
		tiny.WriteString(scaled("e-300") + "\n")
		fmt.Fprintf(&equal, "E%d,vessel,12.5,40,7,30,31,32\n", i)
	}
	tests := []struct {
		name, content string
		want          []string
	}{
		{"all landmarks at one position", equal.String(), []string{"FILE: ", "all 8 landmarks are at one source position"}},
		{"coordinates near 1e308", huge.String(), []string{"FILE:2: ", `column "source_x"`, "is beyond the ±1e+09 µm"}},
		{"coordinates near 1e-300", tiny.String(), []string{"FILE: ", "all 8 landmarks are at one source position"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			path := writeFile(t, filepath.Join(dir, "landmarks.csv"), tc.content)
			want := naming(path, tc.want)
			for _, model := range []string{"auto", "translation", "rigid", "affine", "tps"} {
				refusesAndWritesNothing(t, dir, []string{"fit", path, "--model", model, "-o", filepath.Join(dir, "t.json")}, want)
				refusesAndWritesNothing(t, dir, []string{"check", path, "--model", model, "--json"}, want)
			}
		})
	}
	t.Run("voxel sizes that make the coordinates huge", func(t *testing.T) {
		dir := t.TempDir()
		// A voxel size beyond a metre is refused as a flag (issue 16); one
		// within range can still carry a coordinate beyond a kilometre.
		refusesAndWritesNothing(t, dir, []string{"fit", fx.landmarks, "--source-voxel", "1e300,1,1", "-o", filepath.Join(dir, "t.json")},
			[]string{"--source-voxel", "outside 1e-06 to 1e+06 µm"})
		far := writeFile(t, filepath.Join(dir, "far.csv"), landmarkCSV(40)+"FAR,vessel,5000,10,10,100,100,100,x\n")
		refusesAndWritesNothing(t, dir, []string{"fit", far, "--source-voxel", "1e6,1,1", "-o", filepath.Join(dir, "t.json")},
			[]string{far + ":43: ", `column "source_x"`, "is beyond"})
	})
	t.Run("cells at 1e300", func(t *testing.T) {
		dir := t.TempDir()
		cells := writeFile(t, filepath.Join(dir, "cells.csv"), "id,x,y,z\nc1,100,100,100\nc2,1e300,1e300,1e300\n")
		for _, inverse := range []string{"--inverse=false", "--inverse"} {
			refusesAndWritesNothing(t, dir, []string{"map", fx.transform, cells, inverse, "-o", filepath.Join(dir, "m.csv")},
				[]string{cells + ":3: ", `column "x"`, "is beyond"})
		}
	})
}

// TestProvenance checks that every CSV output starts with its header row
// and has its provenance in a sidecar with the table's checksum and the
// frame and units of its positions, that the check's JSON carries the same
// provenance, and that the transform file records the landmark file's
// SHA-256.
func TestProvenance(t *testing.T) {
	fx := newFixture(t)
	dir := t.TempDir()
	sum := func(path string) string {
		data, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		s := sha256.Sum256(data)
		return hex.EncodeToString(s[:])
	}

	data, err := os.ReadFile(fx.transform)
	if err != nil {
		t.Fatal(err)
	}
	var tf struct {
		Landmarks struct {
			Path   string `json:"path"`
			SHA256 string `json:"sha256"`
		} `json:"landmarks"`
		Program     string `json:"program"`
		LeaveOneOut struct {
			Provenance string `json:"provenance"`
		} `json:"leave_one_out"`
	}
	if err := json.Unmarshal(data, &tf); err != nil {
		t.Fatal(err)
	}
	if tf.Landmarks.SHA256 != sum(fx.landmarks) || tf.Landmarks.Path != fx.landmarks {
		t.Errorf("transform file records landmarks %s sha256 %s, want %s sha256 %s", tf.Landmarks.Path, tf.Landmarks.SHA256, fx.landmarks, sum(fx.landmarks))
	}
	if tf.Program != "ferry "+register.Version {
		t.Errorf("program %q", tf.Program)
	}
	wantFit := fmt.Sprintf("ferry %s fit; %s sha256:%s", register.Version, fx.landmarks, sum(fx.landmarks))
	if !strings.HasPrefix(tf.LeaveOneOut.Provenance, wantFit) {
		t.Errorf("leave-one-out provenance %q, want it to start %q", tf.LeaveOneOut.Provenance, wantFit)
	}

	mapped := filepath.Join(dir, "mapped.csv")
	mustSucceed(t, "map", fx.transform, fx.cells, "--cell-sd", "1,1,2", "-o", mapped)
	line, err := firstLine(mapped)
	if err != nil {
		t.Fatal(err)
	}
	if want := "id,x,y,z,sd_x_um,sd_y_um,sd_z_um,r95_um,status,target_x_um,target_y_um,target_z_um"; !strings.HasPrefix(line, want) {
		t.Errorf("mapped.csv starts\n%s\nwant the header row\n%s", line, want)
	}
	prov := register.Provenance{Command: "map", Inputs: []register.Input{
		{Path: fx.transform, SHA256: sum(fx.transform)}, {Path: fx.cells, SHA256: sum(fx.cells)}},
		Flags: []string{"--cell-sd=1,1,2", "--output=" + mapped}}
	table, err := os.ReadFile(mapped)
	if err != nil {
		t.Fatal(err)
	}
	side, err := register.ReadSidecar(mapped, table)
	if err != nil {
		t.Fatal(err)
	}
	if side.Provenance != prov.Line() || side.Command != "map" || side.TableSHA256 != sum(mapped) || len(side.Inputs) != 2 {
		t.Errorf("sidecar %+v, want provenance %q", side, prov.Line())
	}
	wantCoords := []register.Coordinates{
		{Columns: []string{"x", "y", "z"}, Frame: "target", Units: "um"},
		{Columns: []string{"target_x_um", "target_y_um", "target_z_um"}, Frame: "target", Units: "um"},
	}
	if fmt.Sprint(side.Coordinates) != fmt.Sprint(wantCoords) {
		t.Errorf("sidecar coordinates %v, want %v", side.Coordinates, wantCoords)
	}
	back := filepath.Join(dir, "back.csv")
	mustSucceed(t, "map", "--inverse", fx.transform, mapped, "-o", back)
	if table, err = os.ReadFile(back); err != nil {
		t.Fatal(err)
	}
	if side, err = register.ReadSidecar(back, table); err != nil {
		t.Fatal(err)
	}
	if c, ok := side.CoordinatesOf("x"); !ok || c.Frame != register.FrameSource {
		t.Errorf("map --inverse: sidecar coordinates %v, want x in the source frame", side.Coordinates)
	}

	o := mustSucceed(t, "check", fx.landmarks, "--json", "--model", "affine")
	var check map[string]any
	if err := json.Unmarshal([]byte(o.stdout), &check); err != nil {
		t.Fatal(err)
	}
	want := register.Provenance{Command: "check", Inputs: []register.Input{{Path: fx.landmarks, SHA256: sum(fx.landmarks)}},
		Flags: []string{"--json=true", "--model=affine"}}.Line()
	if check["provenance"] != want {
		t.Errorf("check provenance %q, want %q", check["provenance"], want)
	}

	// The simulator's tables begin with their header rows too.
	simDir := filepath.Join(dir, "sim")
	mustSucceed(t, "simulate", simDir)
	entries, err := os.ReadDir(simDir)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range entries {
		if filepath.Ext(e.Name()) != ".csv" {
			continue
		}
		line, err := firstLine(filepath.Join(simDir, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		if !strings.HasPrefix(line, "id,") {
			t.Errorf("%s starts %q, want its header row", e.Name(), line)
		}
	}
}

func firstLine(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", err
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Scan()
	return sc.Text(), sc.Err()
}
