package main

// Regression tests of the second round of hostile input (issue 16). Each
// reproduces a probe's finding, which failed before its fix.

import (
	"errors"

	"io"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strings"
	"syscall"
	"testing"
	"time"

	"ferry/register"
	"ferry/transform"
)

// TestOutputOntoDevices: -o onto a device, a pipe or standard output writes
// into it as a stream; the device stays a device, /dev/full says the disk is
// full, and "-o -" is standard output for tables and JSON, with the summary
// moved to stderr. Before, the device was renamed over (as root it became a
// regular file) and /dev/full gave no error.
func TestOutputOntoDevices(t *testing.T) {
	if runtime.GOOS != "linux" {
		t.Skip("needs /dev/null and /dev/full")
	}
	fx := newFixture(t)
	for _, tc := range []struct {
		name    string
		args    []string
		wantErr string
	}{
		{"fit onto /dev/null", []string{"fit", fx.landmarks, "-o", "/dev/null"}, ""},
		{"map onto /dev/null", []string{"map", fx.transform, fx.cells, "-o", "/dev/null"}, ""},
		{"fit onto /dev/full", []string{"fit", fx.landmarks, "-o", "/dev/full"}, "no space left on device"},
		{"map onto /dev/full", []string{"map", fx.transform, fx.cells, "-o", "/dev/full"}, "no space left on device"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			before, err := os.Lstat(tc.args[len(tc.args)-1])
			if err != nil {
				t.Fatal(err)
			}
			o := ferry(t, tc.args...)
			if tc.wantErr == "" && o.code != exitOK {
				t.Errorf("%v", o)
			}
			if tc.wantErr != "" {
				oneLine(t, o, tc.wantErr)
			}
			after, err := os.Lstat(tc.args[len(tc.args)-1])
			if err != nil || after.Mode().Type() != before.Mode().Type() || after.Mode()&fs.ModeCharDevice == 0 {
				t.Fatalf("%s is no longer a character device: %v %v", tc.args[len(tc.args)-1], after.Mode(), err)
			}
		})
	}
	t.Run("-o - for a table", func(t *testing.T) {
		o := mustSucceed(t, "map", fx.transform, fx.cells, "-o", "-")
		if !strings.Contains(o.stdout, "r95_um") || strings.Contains(o.stdout, "Mapped") {
			t.Errorf("stdout is not the table alone:\n%s", o.stdout)
		}
		if !strings.Contains(o.stderr, "Wrote standard output") {
			t.Errorf("stderr lacks the summary:\n%s", o.stderr)
		}
		if _, err := os.Stat("-"); err == nil {
			t.Errorf("a file named - was written")
		}
	})
	t.Run("-o - for the transform file", func(t *testing.T) {
		o := mustSucceed(t, "fit", fx.landmarks, "-o", "-")
		if !strings.HasPrefix(strings.TrimSpace(o.stdout), "{") {
			t.Errorf("stdout is not the JSON alone:\n%s", o.stdout)
		}
	})
	t.Run("-o - refused for an image", func(t *testing.T) {
		sc := newScenarioFixture(t)
		o := ferry(t, append([]string{"overlay", sc.transform, sc.stack, sc.plane, "-o", "-"}, sc.imageFlags()...)...)
		oneLine(t, o, "-o -", "file name")
	})
	t.Run("a named pipe", func(t *testing.T) {
		p := filepath.Join(t.TempDir(), "fifo")
		if err := syscall.Mkfifo(p, 0o600); err != nil {
			t.Skip(err)
		}
		got := make(chan string, 1)
		go func() {
			f, err := os.Open(p)
			if err != nil {
				got <- err.Error()
				return
			}
			b, _ := io.ReadAll(f)
			f.Close()
			got <- string(b)
		}()
		mustSucceed(t, "map", fx.transform, fx.cells, "-o", p)
		select {
		case s := <-got:
			if !strings.Contains(s, "r95_um") {
				t.Errorf("the pipe got %q", s)
			}
		case <-time.After(10 * time.Second):
			t.Fatal("nothing came through the pipe")
		}
		if info, err := os.Lstat(p); err != nil || info.Mode()&fs.ModeNamedPipe == 0 {
			t.Errorf("the pipe was replaced")
		}
	})
}

// TestOutputOntoStdoutLink runs the program with -o /dev/stdout as a shell
// user would, stdout a pipe: the data come out on the pipe, the summary on
// stderr, and /dev/stdout is not touched. A link to /proc/self/fd/1 in a
// folder of the test's stands in for /dev/stdout, so that the test cannot
// harm the machine if it fails.
func TestOutputOntoStdoutLink(t *testing.T) {
	if runtime.GOOS != "linux" {
		t.Skip("needs /proc")
	}
	fx := newFixture(t)
	dir := t.TempDir()
	link := filepath.Join(dir, "stdout")
	if err := os.Symlink("/proc/self/fd/1", link); err != nil {
		t.Fatal(err)
	}
	r := runChild(t, dir, nil, 0, "map", fx.transform, fx.cells, "-o", link)
	if r.code != 0 {
		t.Fatalf("%v", r.outcome)
	}
	if !strings.Contains(r.stdout, "r95_um") || !strings.Contains(r.stderr, "Wrote") {
		t.Errorf("stdout %q, stderr %q", r.stdout, r.stderr)
	}
	if info, err := os.Lstat(link); err != nil || info.Mode()&fs.ModeSymlink == 0 {
		t.Errorf("the link was replaced")
	}
}

// TestHugeJobRefused: a spline on 100 000 landmarks, the default model's
// choice, needs more than a terabyte. It is refused in one line before
// starting, with the estimate and the way out. Before, the program died
// with "fatal error: runtime: out of memory" and a long stack trace.
func TestHugeJobRefused(t *testing.T) {
	const n = 100000
	dir := t.TempDir()
	lm := writeFile(t, filepath.Join(dir, "landmarks.csv"), landmarkCSV(n))
	p := &register.Problem{Dim: 3, IDs: make([]string, n)}
	est := register.EstimateJob(p, register.Settings{Smoothing: register.Smoothing{Auto: true}})
	if avail := register.AvailableMemory(); avail == 0 || est.Bytes <= float64(avail) {
		t.Skipf("this machine has %d bytes available: the job of %g bytes would run", avail, est.Bytes)
	}
	for _, cmd := range []string{"check", "fit"} {
		args := []string{cmd, lm}
		if cmd == "fit" {
			args = append(args, "-o", filepath.Join(dir, "t.json"))
		}
		start := time.Now()
		o := ferry(t, args...)
		oneLine(t, o, "landmarks.csv", "100000 landmarks", "TB of memory", "available", "--model affine")
		if d := time.Since(start); d > 20*time.Second {
			t.Errorf("%s took %v to refuse", cmd, d)
		}
	}
	// The way out works: the affine model on the same landmarks.
	mustSucceed(t, "fit", lm, "--model", "affine", "-o", filepath.Join(dir, "affine.json"))
}

// TestSignalsEndALongFit sends SIGINT, SIGTERM and SIGHUP to a spline check
// and fit that would take many seconds, and wants the program to end within
// a couple of seconds, with exit 1, a message saying so and nothing left in
// the folder. Before, a 3 000-landmark fit ignored SIGINT for 164 s and
// SIGHUP left a temporary file behind.
func TestSignalsEndALongFit(t *testing.T) {
	if runtime.GOOS == "windows" {
		t.Skip("no signals on Windows")
	}
	dir := t.TempDir()
	lm := writeFile(t, filepath.Join(dir, "landmarks.csv"), landmarkCSV(1200))
	// One fit of a 2 500-landmark spline is a factorisation that takes
	// seconds and checks nothing: the signal handler ends the program.
	big := writeFile(t, filepath.Join(dir, "big.csv"), landmarkCSV(2500))
	for _, tc := range []struct {
		sig  syscall.Signal
		args []string
	}{
		{syscall.SIGINT, []string{"check", lm}},
		{syscall.SIGINT, []string{"check", big, "--model", "tps", "--smoothing", "0"}},
		{syscall.SIGTERM, []string{"fit", lm, "-o", filepath.Join(dir, "t.json")}},
		{syscall.SIGHUP, []string{"fit", lm, "-o", filepath.Join(dir, "t.json")}},
	} {
		t.Run(tc.sig.String()+" "+tc.args[0], func(t *testing.T) {
			cmd := exec.Command(ferryBinary(t), tc.args...)
			cmd.Dir = dir
			var stderr strings.Builder
			cmd.Stderr = &stderr
			if err := cmd.Start(); err != nil {
				t.Fatal(err)
			}
			time.Sleep(1500 * time.Millisecond)
			sent := time.Now()
			if err := cmd.Process.Signal(tc.sig); err != nil {
				t.Fatal(err)
			}
			done := make(chan error, 1)
			go func() { done <- cmd.Wait() }()
			var err error
			select {
			case err = <-done:
			case <-time.After(15 * time.Second):
				cmd.Process.Kill()
				<-done
				t.Fatalf("still running 15 s after %v", tc.sig)
			}
			took := time.Since(sent)
			if took > 3*time.Second {
				t.Errorf("ended %v after %v, want within a couple of seconds", took.Round(time.Millisecond), tc.sig)
			}
			var exit *exec.ExitError
			if !errors.As(err, &exit) || exit.ExitCode() != exitError {
				t.Errorf("ended with %v, want exit status 1; stderr %q", err, stderr.String())
			}
			if !strings.Contains(stderr.String(), "interrupted") {
				t.Errorf("stderr %q does not say interrupted", stderr.String())
			}
			entries, _ := os.ReadDir(dir)
			if len(entries) != 2 {
				t.Errorf("folder holds %v, want only the landmarks", entries)
			}
			t.Logf("%v: ended after %v: %s", tc.sig, took.Round(time.Millisecond), strings.TrimSpace(stderr.String()))
		})
	}

}

// TestScenarioFolderKeepsUsersFiles: simulate and demo refuse a folder that
// holds a file of one of their names that they did not write, and leave it
// as it was; a folder of an earlier scenario is written over. Before, both
// replaced a user's landmarks.csv without a word.
func TestScenarioFolderKeepsUsersFiles(t *testing.T) {
	for _, tc := range []struct {
		cmd, file string
	}{
		{"simulate", "landmarks.csv"},
		{"simulate", "em_plane.tif"},
		{"demo", "cells.csv"},
		{"demo", "report.html"},
	} {
		t.Run(tc.cmd+" "+tc.file, func(t *testing.T) {
			dir := t.TempDir()
			writeFile(t, filepath.Join(dir, tc.file), "the user's own\n")
			before := snapshot(t, dir)
			o := ferry(t, tc.cmd, dir)
			oneLine(t, o, dir, tc.file, "refusing to write over")
			if diff := sameFolder(before, snapshot(t, dir)); diff != "" {
				t.Error(diff)
			}
		})
	}
	t.Run("an earlier scenario", func(t *testing.T) {
		dir := t.TempDir()
		mustSucceed(t, "simulate", dir)
		mustSucceed(t, "simulate", dir, "--seed", "2")
	})
}

// TestOutputsReadBack: what ferry writes, it reads. map of a map output
// passed the kept columns through under the names of its own (sd_x_um,
// r95_um, status twice) and the next reader refused the file; a line break
// in an input's name broke the provenance line in two. Each output here is
// read again by the command that takes it.
func TestOutputsReadBack(t *testing.T) {
	fx := newFixture(t)
	dir := t.TempDir()
	odd := writeFile(t, filepath.Join(dir, "ce\nlls;\x1b.csv"), cellsCSV(30))
	once := filepath.Join(dir, "once.csv")
	twice := filepath.Join(dir, "twice.csv")
	thrice := filepath.Join(dir, "thrice.csv")
	mustSucceed(t, "map", fx.transform, odd, "-o", once)
	mustSucceed(t, "map", fx.transform, once, "-o", twice)
	mustSucceed(t, "map", fx.transform, twice, "-o", thrice)
	mustSucceed(t, "match", fx.transform, twice, fx.cells, "-o", filepath.Join(dir, "matches.csv"))
	data, err := os.ReadFile(thrice)
	if err != nil {
		t.Fatal(err)
	}
	var header string
	for _, line := range strings.Split(string(data), "\n") {
		if !strings.HasPrefix(line, "#") {
			header = line
			break
		}
	}
	seen := map[string]bool{}
	for _, c := range strings.Split(header, ",") {
		if seen[strings.ToLower(c)] {
			t.Errorf("column %q twice in %s", c, header)
		}
		seen[strings.ToLower(c)] = true
	}
	for _, c := range []string{"r95_um", "input_r95_um", "input_input_r95_um", "input_input_status"} {
		if !seen[c] {
			t.Errorf("no column %s in %s", c, header)
		}
	}
	// An error naming the odd file stays on one line.
	bad := writeFile(t, filepath.Join(dir, "ba\nd.csv"), "id,x,y,z\nc1,1,2,oops\n")
	oneLine(t, ferry(t, "map", fx.transform, bad, "-o", filepath.Join(dir, "x.csv")), `ba\nd.csv:2`)
}

// TestImplausibleTransformRefused: a transform file edited by hand and
// resealed (its checksum recomputed) with an offset of 1e200 µm made match
// write +Inf in distance_um. map and match now refuse such a transform,
// naming the file, and the match writer refuses any non-finite value.
func TestImplausibleTransformRefused(t *testing.T) {
	fx := newFixture(t)
	dir := t.TempDir()
	affine := filepath.Join(dir, "affine.json")
	mustSucceed(t, "fit", fx.landmarks, "--model", "affine", "-o", affine)
	for _, tc := range []struct {
		name, from, want string
		edit             func(f *register.Registration)
	}{
		{"affine offset 1e200", affine, "beyond", func(f *register.Registration) { f.Transform.(*transform.Linear).T[0] = 1e200 }},
		{"affine matrix 1e200", affine, "singular", func(f *register.Registration) { f.Transform.(*transform.Linear).A[1][1] = 1e200 }},
		{"spline offset 1e200", fx.transform, "beyond", func(f *register.Registration) { f.Transform.(*transform.Spline).Offset[2] = -1e200 }},
	} {
		t.Run(tc.name, func(t *testing.T) {
			f, err := register.ReadRegistrationFile(tc.from)
			if err != nil {
				t.Fatal(err)
			}
			tc.edit(f)
			data, err := f.Marshal()
			if err != nil {
				t.Fatal(err)
			}
			bad := writeFile(t, filepath.Join(dir, "resealed.json"), string(data))
			for _, args := range [][]string{
				{"map", bad, fx.cells, "-o", filepath.Join(dir, "mapped.csv")},
				{"match", bad, fx.cells, fx.cells, "-o", filepath.Join(dir, "matches.csv")},
			} {
				oneLine(t, ferry(t, args...), "resealed.json", tc.want)
				for _, out := range []string{"mapped.csv", "matches.csv"} {
					if _, err := os.Stat(filepath.Join(dir, out)); err == nil {
						t.Errorf("%s: %s written", args[0], out)
					}
				}
			}
		})
	}
}

// TestHangupLeavesNothing sends SIGHUP (a closed terminal) to a map of
// 100 000 cells at points through its run, writing included. Before, the
// signal killed the program and left a .ferry-partial-* file in the folder.
func TestHangupLeavesNothing(t *testing.T) {
	if runtime.GOOS == "windows" {
		t.Skip("no SIGHUP on Windows")
	}
	if testing.Short() {
		t.Skip("runs the program several times")
	}
	fx := newFixture(t)
	cells := writeFile(t, filepath.Join(fx.dir, "many-cells.csv"), cellsCSV(100000))
	dir := t.TempDir()
	args := []string{"map", fx.transform, cells, "-o", filepath.Join(dir, "mapped.csv")}
	first := runChild(t, dir, nil, 0, args...)
	if first.code != 0 {
		t.Fatalf("the complete run: %v", first.outcome)
	}
	want := snapshot(t, dir)
	for _, share := range []float64{0.3, 0.6, 0.8, 0.9, 0.97} {
		cmd := exec.Command(ferryBinary(t), args...)
		cmd.Dir = dir
		var stderr strings.Builder
		cmd.Stderr = &stderr
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		after := time.Duration(share * float64(first.elapsed))
		timer := time.AfterFunc(after, func() { cmd.Process.Signal(syscall.SIGHUP) })
		err := cmd.Wait()
		timer.Stop()
		var exit *exec.ExitError
		if errors.As(err, &exit) {
			if ws, ok := exit.Sys().(syscall.WaitStatus); ok && ws.Signaled() {
				if after < beforeMain {
					t.Logf("SIGHUP at %.0f %%: killed by the signal, sent before the program could have set its handler", 100*share)
					continue
				}
				t.Errorf("SIGHUP at %.0f %%: killed by the signal", 100*share)
			}
		}
		if diff := sameFolder(want, snapshot(t, dir)); diff != "" {
			t.Errorf("SIGHUP at %.0f %%: %s", 100*share, diff)
		}
	}
}

// TestRepeatedSourceNamed: two landmarks at one source position, with
// different targets or the same, were refused by the spline naming "pairs 0
// and 39" (0-based indices). The refusal now names both by id and line,
// with the way out, for the default model and for --model tps with any
// smoothing.
func TestRepeatedSourceNamed(t *testing.T) {
	dir := t.TempDir()
	base := landmarkCSV(40)
	lines := strings.Split(strings.TrimSpace(base), "\n")
	first := strings.Split(lines[3], ",") // L02 on line 4
	for _, tc := range []struct {
		name, target string
		args         []string
		want         string
	}{
		{"another target, default model", "999", nil, "targets"},
		{"another target, tps auto", "999", []string{"--model", "tps"}, "targets"},
		{"another target, tps 0", "999", []string{"--model", "tps", "--smoothing", "0"}, "targets"},
		{"the same pair twice", first[7], nil, "given twice"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			dup := append([]string{"DUP"}, first[1:]...)
			dup[7] = tc.target
			path := writeFile(t, filepath.Join(dir, "landmarks.csv"), base+strings.Join(dup, ",")+"\n")
			o := ferry(t, append([]string{"check", path}, tc.args...)...)
			oneLine(t, o, "landmarks.csv", "L02 (line 4)", "DUP (line 43)", tc.want, "--exclude DUP")
		})
	}
	// A linear model takes the repeated position.
	path := writeFile(t, filepath.Join(dir, "landmarks.csv"), base+"DUP,"+strings.Join(first[1:], ",")+"\n")
	if o := ferry(t, "check", path, "--model", "affine"); o.code == exitError {
		t.Errorf("affine: %v", o)
	}
}

// TestMessagesBlameTheRightInput: each fault is named where it is. Before, a
// coordinate of 999999999 gave "source points lie on a plane" with no line,
// --cell-sd 1e300 blamed a column of the cells file, and a voxel size of
// 5e-324 was taken, so that map --inverse later blamed the cells file.
func TestMessagesBlameTheRightInput(t *testing.T) {
	fx := newFixture(t)
	dir := t.TempDir()
	far := writeFile(t, filepath.Join(dir, "far.csv"), landmarkCSV(40)+"FAR,vessel,999999999,10,10,100,100,100,x\n")
	tiny, err := register.ReadRegistrationFile(fx.transform)
	if err != nil {
		t.Fatal(err)
	}
	tiny.Voxels.Target = &transform.Vec{5e-324, 1, 1}
	data, err := tiny.Marshal()
	if err != nil {
		t.Fatal(err)
	}
	tinyPath := writeFile(t, filepath.Join(dir, "tiny-voxel.json"), string(data))
	out := filepath.Join(dir, "out.csv")
	for _, tc := range []struct {
		name string
		args []string
		want []string
	}{
		{"a coordinate of 999999999", []string{"check", far}, []string{"far.csv", "FAR (line 43)", "source", "--exclude FAR"}},
		{"--cell-sd 1e300", []string{"map", fx.transform, fx.cells, "--cell-sd", "1e300,1,1", "-o", out}, []string{"--cell-sd", "1e+300", "outside"}},
		{"--cell-sd 5e-324", []string{"map", fx.transform, fx.cells, "--cell-sd", "1,5e-324,1", "-o", out}, []string{"--cell-sd", "Y is 5e-324"}},
		{"--source-voxel 5e-324", []string{"fit", fx.landmarks, "--source-voxel", "5e-324,1,1", "-o", out}, []string{"--source-voxel", "outside"}},
		{"--target-sd 1e300", []string{"check", fx.landmarks, "--target-sd", "1,1,1e300"}, []string{"--target-sd", "outside"}},
		{"--candidate-sd 1e300", []string{"match", fx.transform, fx.cells, fx.cells, "--candidate-sd", "1e300", "-o", out}, []string{"--candidate-sd"}},
		{"a transform file with a voxel of 5e-324", []string{"map", tinyPath, fx.cells, "--inverse", "-o", out}, []string{"tiny-voxel.json", "voxel size"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			o := ferry(t, tc.args...)
			oneLine(t, o, tc.want...)
			if strings.Contains(o.stderr, "cells.csv") || strings.Contains(o.stderr, "plane") {
				t.Errorf("blames the wrong input: %s", o.stderr)
			}
			if _, err := os.Stat(out); err == nil {
				t.Errorf("%s written", out)
			}
		})
	}
}

// TestOneNumberRule: 1_234.5 was read as 1234.5 while 1,234.5 and 1 234.5
// were refused. Digit separators of any kind are now refused, in tables
// (landmarks' tests) and in every number flag.
func TestOneNumberRule(t *testing.T) {
	fx := newFixture(t)
	dir := t.TempDir()
	out := filepath.Join(dir, "out.csv")
	cells := writeFile(t, filepath.Join(dir, "cells.csv"), "id,x,y,z\nc1,1_234.5,2,3\n")
	for _, tc := range []struct {
		name string
		args []string
		want string
	}{
		{"a table", []string{"map", fx.transform, cells, "-o", out}, `cells.csv:2: column "x"`},
		{"--smoothing", []string{"check", fx.landmarks, "--smoothing", "1_0"}, "--smoothing"},
		{"--max-error", []string{"check", fx.landmarks, "--max-error", "1_0"}, "max-error"},
		{"--source-sd", []string{"check", fx.landmarks, "--source-sd", "1_0,1,1"}, "--source-sd"},
		{"--candidate-sd", []string{"match", fx.transform, fx.cells, fx.cells, "--candidate-sd", "1_0", "-o", out}, "candidate-sd"},
		{"--min-p", []string{"match", fx.transform, fx.cells, fx.cells, "--min-p", "0_9", "-o", out}, "min-p"},
		{"--prior-counterpart", []string{"match", fx.transform, fx.cells, fx.cells, "--prior-counterpart", "0_5", "-o", out}, "--prior-counterpart"},
		{"hexadecimal --max-error", []string{"check", fx.landmarks, "--max-error", "0x10"}, "max-error"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			oneLine(t, ferry(t, tc.args...), tc.want)
		})
	}
}

// TestImageFormatFollowsTheName: resample -o x.jpg wrote TIFF data and
// overlay -o x.tif wrote PNG. The extension now picks the format, and one
// the command cannot write is refused before the work starts.
func TestImageFormatFollowsTheName(t *testing.T) {
	sc := newScenarioFixture(t)
	tiffMagic, pngMagic := "II*\x00", "\x89PNG"
	for _, tc := range []struct {
		cmd, name, magic string // magic "" means refused
	}{
		{"resample", "x.tif", tiffMagic},
		{"resample", "x.TIFF", tiffMagic},
		{"resample", "x.png", pngMagic},
		{"resample", "x.jpg", ""},
		{"overlay", "x.png", pngMagic},
		{"overlay", "x.tif", ""},
		{"overlay", "x.jpeg", ""},
	} {
		t.Run(tc.cmd+" "+tc.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), tc.name)
			args := []string{"resample", sc.transform, sc.stack, "--like", sc.plane, "-o", out}
			if tc.cmd == "overlay" {
				args = []string{"overlay", sc.transform, sc.stack, sc.plane, "-o", out}
			}
			o := ferry(t, append(args, sc.imageFlags()...)...)
			if tc.magic == "" {
				oneLine(t, o, tc.name, "name the output")
				if _, err := os.Stat(out); err == nil {
					t.Errorf("%s written", out)
				}
				return
			}
			if o.code != exitOK {
				t.Fatalf("%v", o)
			}
			data, err := os.ReadFile(out)
			if err != nil || !strings.HasPrefix(string(data), tc.magic) {
				t.Errorf("%s does not begin %q: %.8q", tc.name, tc.magic, data)
			}
		})
	}
}
