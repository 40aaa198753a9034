package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestCancelledBeforeWriting runs the commands that write with a context
// cancelled before the output is renamed into place: exit 1, one line saying so, the earlier
// output byte for byte as it was and no temporary file.
func TestCancelledBeforeWriting(t *testing.T) {
	fx := newFixture(t)
	dir := t.TempDir()
	out := writeFile(t, filepath.Join(dir, "mapped.csv"), "an earlier output\n")
	outTIF := writeFile(t, filepath.Join(dir, "resampled.tif"), "an earlier output\n")
	outPNG := writeFile(t, filepath.Join(dir, "overlay.png"), "an earlier output\n")
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	sc := newScenarioFixture(t)
	for _, args := range [][]string{
		{"map", fx.transform, fx.cells, "-o", out},
		{"fit", fx.landmarks, "-o", out},
		append([]string{"resample", sc.transform, sc.stack, "--like", sc.plane, "-o", outTIF}, sc.imageFlags()...),
		append([]string{"overlay", sc.transform, sc.stack, sc.plane, "-o", outPNG}, sc.imageFlags()...),
		{"warp", sc.transform, sc.stack, "--voxel", "5,5,5", "-o", outTIF},
	} {
		before := snapshot(t, dir)
		o := ferryContext(ctx, args...)
		oneLine(t, o, "interrupted", args[slices.Index(args, "-o")+1]+" not written")
		if diff := sameFolder(before, snapshot(t, dir)); diff != "" {
			t.Errorf("%s: %s", args[0], diff)
		}
	}
}

// childRun is the outcome of one run of the built program.
type childRun struct {
	outcome
	signalled bool
	elapsed   time.Duration
}

// runChild runs the built program in dir with the environment env added,
// sending it SIGINT after interruptAfter when that is not zero.
func runChild(t *testing.T, dir string, env []string, interruptAfter time.Duration, args ...string) childRun {
	t.Helper()
	cmd := exec.Command(ferryBinary(t), args...)
	cmd.Dir = dir
	cmd.Env = append(os.Environ(), env...)
	var stdout, stderr strings.Builder
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	start := time.Now()
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	if interruptAfter > 0 {
		timer := time.AfterFunc(interruptAfter, func() { cmd.Process.Signal(os.Interrupt) })
		defer timer.Stop()
	}
	err := cmd.Wait()
	r := childRun{outcome: outcome{stdout: stdout.String(), stderr: stderr.String()}, elapsed: time.Since(start)}
	var exit *exec.ExitError
	switch {
	case err == nil:
	case errors.As(err, &exit):
		r.code = exit.ExitCode()
		if ws, ok := exit.Sys().(syscall.WaitStatus); ok && ws.Signaled() {
			r.signalled = true
		}
	default:
		t.Fatal(err)
	}
	return r
}

// TestInterrupt sends SIGINT to the program at points through a run that
// writes over the outputs of an earlier, complete run, and wants each time
// no temporary file left and every output either as the earlier run left it
// or as a complete run writes it: both are the same bytes, since a run is
// deterministic, so every file must be byte for byte the earlier one.
func TestInterrupt(t *testing.T) {
	if runtime.GOOS == "windows" {
		t.Skip("SIGINT cannot be sent to a process on Windows")
	}
	if testing.Short() {
		t.Skip("runs the program a dozen times")
	}
	fx := newFixture(t)
	cells := writeFile(t, filepath.Join(fx.dir, "many-cells.csv"), cellsCSV(100000))
	tests := []struct {
		name string
		args []string
		// folder holds every output
		folder string
	}{
		{"demo", []string{"demo", "out"}, "out"},
		{"map", []string{"map", fx.transform, cells, "-o", filepath.Join("out", "mapped.csv")}, "out"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			if err := os.MkdirAll(filepath.Join(dir, tc.folder), 0o755); err != nil {
				t.Fatal(err)
			}
			first := runChild(t, dir, nil, 0, tc.args...)
			if first.code != 0 {
				t.Fatalf("the complete run: %v", first.outcome)
			}
			want := snapshot(t, filepath.Join(dir, tc.folder))
			for _, share := range []float64{0.05, 0.25, 0.5, 0.75, 0.95} {
				after := time.Duration(share * float64(first.elapsed))
				r := runChild(t, dir, nil, after, tc.args...)
				label := fmt.Sprintf("SIGINT after %v of %v", after.Round(time.Millisecond), first.elapsed.Round(time.Millisecond))
				switch {
				case r.signalled && after < beforeMain:
					t.Logf("%s: killed by the signal, sent before the program could have set its handler", label)
					continue
				case r.signalled:
					t.Errorf("%s: the program was killed by the signal instead of ending itself", label)
				case r.code == exitError:
					oneLine(t, r.outcome, "interrupted")
				case r.code != exitOK:
					t.Errorf("%s: %v", label, r.outcome)
				}
				t.Logf("%s: exit %d %s", label, r.code, strings.TrimSpace(r.stderr))
				got := snapshot(t, filepath.Join(dir, tc.folder))
				for name := range got {
					if strings.HasPrefix(name, ".ferry-partial-") {
						t.Errorf("%s: temporary file %s left behind", label, name)
					}
				}
				if diff := sameFolder(want, got); diff != "" {
					t.Errorf("%s (exit %d): %s", label, r.code, diff)
				}
			}
		})
	}
}

// TestDeterministic runs the demo twice, on one core and on two, and wants
// every file it writes byte for byte the same. The runs are in two folders
// of the same relative name, since the outputs record the paths given.
func TestDeterministic(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the whole demo twice")
	}
	var runs [2]map[string][]byte
	for i, procs := range []int{1, 2} {
		dir := t.TempDir()
		r := runChild(t, dir, []string{fmt.Sprintf("GOMAXPROCS=%d", procs)}, 0, "demo", "out")
		if r.code != 0 {
			t.Fatalf("demo with GOMAXPROCS=%d: %v", procs, r.outcome)
		}
		runs[i] = snapshot(t, filepath.Join(dir, "out"))
	}
	if len(runs[0]) < 10 {
		t.Errorf("the demo wrote only %d files", len(runs[0]))
	}
	for name, data := range runs[0] {
		other, ok := runs[1][name]
		switch {
		case !ok:
			t.Errorf("%s written with GOMAXPROCS=1 only", name)
		case string(other) != string(data):
			t.Errorf("%s differs between GOMAXPROCS=1 and 2", name)
		}
	}
	for name := range runs[1] {
		if _, ok := runs[0][name]; !ok {
			t.Errorf("%s written with GOMAXPROCS=2 only", name)
		}
	}
}

// beforeMain is how soon after its start a program may not yet have set
// its signal handler: a signal then kills any program. Starting takes some
// 15 ms on a quiet machine; on one whose two cores run a dozen builds, a
// signal 100 ms after the start has been seen to arrive first.
const beforeMain = 300 * time.Millisecond
