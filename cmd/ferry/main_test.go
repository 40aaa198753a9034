package main

// The end-to-end tests of the commands. Most go through run, in this
// process; the tests of interrupts and of determinism across GOMAXPROCS run
// the built program as a child, which TestMain builds once.

import (
	"bytes"
	"context"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"ferry/simulate"
)

// binDir holds the program built for the child-process tests; it is made
// on first use and removed by TestMain.
var binDir = struct {
	once sync.Once
	dir  string
	path string
	err  error
}{}

func TestMain(m *testing.M) {
	code := m.Run()
	if binDir.dir != "" {
		os.RemoveAll(binDir.dir)
	}
	os.Exit(code)
}

// ferryBinary builds the program once per test run and returns its path.
func ferryBinary(t *testing.T) string {
	t.Helper()
	binDir.once.Do(func() {
		binDir.dir, binDir.err = os.MkdirTemp("", "ferry-test-bin-")
		if binDir.err != nil {
			return
		}
		binDir.path = filepath.Join(binDir.dir, "ferry")
		out, err := exec.Command("go", "build", "-o", binDir.path, ".").CombinedOutput()
		if err != nil {
			binDir.err = fmt.Errorf("go build: %v\n%s", err, out)
		}
	})
	if binDir.err != nil {
		t.Fatal(binDir.err)
	}
	return binDir.path
}

// outcome is what one run of the program gave.
type outcome struct {
	code           int
	stdout, stderr string
}

func (o outcome) String() string {
	return fmt.Sprintf("exit %d\nstdout:\n%s\nstderr:\n%s", o.code, o.stdout, o.stderr)
}

// ferry runs one command line through run.
func ferry(t testing.TB, args ...string) outcome {
	t.Helper()
	return ferryContext(context.Background(), args...)
}

func ferryContext(ctx context.Context, args ...string) outcome {
	var stdout, stderr bytes.Buffer
	code := run(ctx, args, &stdout, &stderr)
	return outcome{code: code, stdout: stdout.String(), stderr: stderr.String()}
}

// mustSucceed runs a command line that has to exit 0.
func mustSucceed(t testing.TB, args ...string) outcome {
	t.Helper()
	o := ferry(t, args...)
	if o.code != exitOK {
		t.Fatalf("ferry %s: %v", strings.Join(args, " "), o)
	}
	return o
}

func writeFile(t testing.TB, path, content string) string {
	t.Helper()
	if err := os.WriteFile(path, []byte(content), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// landmarkCSV is a 3-D landmark file of n pairs on a jittered grid over a
// 300 µm cube, mapped by a mild affine map with a smooth bend and a
// deterministic sub-micrometre "picking error": enough for every model.
func landmarkCSV(n int) string {
	var b strings.Builder
	b.WriteString("# test landmarks\nid,kind,source_x,source_y,source_z,target_x,target_y,target_z,note\n")
	side := int(math.Ceil(math.Cbrt(float64(n))))
	for i := range n {
		gx, gy, gz := i%side, (i/side)%side, i/(side*side)
		step := 300 / float64(side)
		x := step * (float64(gx) + 0.5 + 0.3*math.Sin(float64(7*i+1)))
		y := step * (float64(gy) + 0.5 + 0.3*math.Sin(float64(11*i+2)))
		z := step * (float64(gz) + 0.5 + 0.3*math.Sin(float64(13*i+3)))
		tx := 1.02*x + 0.05*y + 12 + 4*math.Sin(y/90) + 0.3*math.Sin(float64(17*i))
		ty := -0.04*x + 0.98*y + 0.02*z - 7 + 0.3*math.Sin(float64(19*i))
		tz := 0.9*z + 0.01*x + 3 + 2*math.Cos(x/120) + 0.3*math.Sin(float64(23*i))
		kind := "vessel"
		if i%4 == 3 {
			kind = "soma"
		}
		fmt.Fprintf(&b, "L%02d,%s,%.4f,%.4f,%.4f,%.4f,%.4f,%.4f,pick %d\n", i+1, kind, x, y, z, tx, ty, tz, i+1)
	}
	return b.String()
}

// cellsCSV is a cells file of n cells spread through the landmarks' cube,
// with one extra column.
func cellsCSV(n int) string {
	var b strings.Builder
	b.WriteString("id,x,y,z,osi\n")
	for i := range n {
		f := float64(i)
		fmt.Fprintf(&b, "c%d,%.3f,%.3f,%.3f,%.2f\n", i+1, 40+220*frac(f*0.618034), 40+220*frac(f*0.414214), 40+220*frac(f*0.732051), frac(f*0.1))
	}
	return b.String()
}

func frac(x float64) float64 { return x - math.Floor(x) }

// fixture is a folder with a good landmark file, its transform and a cells
// file, made through the commands themselves.
type fixture struct {
	dir, landmarks, transform, cells string
}

func newFixture(t testing.TB) fixture {
	t.Helper()
	dir := t.TempDir()
	f := fixture{
		dir:       dir,
		landmarks: writeFile(t, filepath.Join(dir, "landmarks.csv"), landmarkCSV(40)),
		cells:     writeFile(t, filepath.Join(dir, "cells.csv"), cellsCSV(30)),
		transform: filepath.Join(dir, "transform.json"),
	}
	mustSucceed(t, "fit", f.landmarks, "-o", f.transform)
	return f
}

// scenarioFixture is the simulator's small scenario with its images, and a
// transform fitted from its landmarks.
type scenarioFixture struct {
	files            simulate.Files
	stack, plane     string
	transform        string
	ip               simulate.ImageParams
	sourceVox, tgVox string
}

func newScenarioFixture(t testing.TB) scenarioFixture {
	t.Helper()
	dir := t.TempDir()
	s, err := simulate.Generate(simulate.SmallParams(), 3)
	if err != nil {
		t.Fatal(err)
	}
	var f scenarioFixture
	if f.files, err = s.Write(dir); err != nil {
		t.Fatal(err)
	}
	f.ip = s.DefaultImageParams()
	if f.stack, f.plane, err = s.WriteImages(dir, f.ip); err != nil {
		t.Fatal(err)
	}
	f.transform = filepath.Join(dir, "transform.json")
	mustSucceed(t, "fit", f.files.Landmarks, "-o", f.transform)
	v := f.ip.SourceVoxelUM
	f.sourceVox = fmt.Sprintf("%g,%g,%g", v[0], v[1], v[2])
	v = f.ip.TargetVoxelUM
	f.tgVox = fmt.Sprintf("%g,%g,%g", v[0], v[1], v[2])
	return f
}

// imageFlags are the voxel and page flags that resample and overlay need
// for the scenario's images.
func (f scenarioFixture) imageFlags() []string {
	return []string{"--source-voxel", f.sourceVox, "--target-voxel", f.tgVox, "--target-z", fmt.Sprint(f.ip.TargetZ)}
}

// snapshot is the names and bytes of every file in a folder.
func snapshot(t testing.TB, dir string) map[string][]byte {
	t.Helper()
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	out := make(map[string][]byte, len(entries))
	for _, e := range entries {
		if e.IsDir() {
			out[e.Name()+"/"] = nil
			continue
		}
		data, err := os.ReadFile(filepath.Join(dir, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		out[e.Name()] = data
	}
	return out
}

// sameFolder reports the first difference between two snapshots, or "".
func sameFolder(before, after map[string][]byte) string {
	for name, data := range before {
		got, ok := after[name]
		switch {
		case !ok:
			return name + " disappeared"
		case !bytes.Equal(got, data):
			return name + " changed"
		}
	}
	for name := range after {
		if _, ok := before[name]; !ok {
			return name + " appeared"
		}
	}
	return ""
}

// naming puts path in place of every "FILE" in the expected parts of a
// message.
func naming(path string, want []string) []string {
	out := make([]string, len(want))
	for i, w := range want {
		out[i] = strings.ReplaceAll(w, "FILE", path)
	}
	return out
}

// oneLine checks that a failed run said what was wrong in exactly one line
// of stderr holding every one of want.
func oneLine(t testing.TB, o outcome, want ...string) {
	t.Helper()
	if o.code != exitError {
		t.Errorf("exit %d, want %d\n%v", o.code, exitError, o)
	}
	msg := strings.TrimSuffix(o.stderr, "\n")
	// A usage mistake may add the command's usage line, nothing else.
	if first, usage, two := strings.Cut(msg, "\n"); two && strings.HasPrefix(usage, "usage: ferry ") && !strings.Contains(usage, "\n") {
		msg = first
	}
	if msg == "" || strings.Contains(msg, "\n") {
		t.Errorf("stderr is not one line (and a usage line):\n%s", o.stderr)
	}
	for _, w := range want {
		if !strings.Contains(msg, w) {
			t.Errorf("stderr %q does not say %q", msg, w)
		}
	}
	if strings.Contains(o.stderr, "panic") || strings.Contains(o.stderr, "goroutine") {
		t.Errorf("the program crashed:\n%s", o.stderr)
	}
}
