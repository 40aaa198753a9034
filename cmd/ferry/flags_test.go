package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestFlagValidation gives every command flags it must refuse, and wants
// exit 1 with one line that names the flag, and nothing written.
func TestFlagValidation(t *testing.T) {
	fx := newFixture(t)
	sc := newScenarioFixture(t)
	dir := t.TempDir()
	out := filepath.Join(dir, "out")
	twoD := writeFile(t, filepath.Join(dir, "landmarks2d.csv"), "id,kind,source_x,source_y,target_x,target_y\n"+
		"a,vessel,0,0,1,1\nb,vessel,10,0,11,1\nc,vessel,0,10,1,11\nd,soma,10,10,11,11\ne,soma,5,3,6,4\n")
	fit := func(flags ...string) []string { return append([]string{"fit", fx.landmarks, "-o", out}, flags...) }
	check := func(flags ...string) []string { return append([]string{"check", fx.landmarks}, flags...) }
	mapCells := func(flags ...string) []string {
		return append([]string{"map", fx.transform, fx.cells, "-o", out}, flags...)
	}
	resample := func(flags ...string) []string {
		return append(append([]string{"resample", sc.transform, sc.stack, "--like", sc.plane, "-o", out}, sc.imageFlags()...), flags...)
	}
	overlay := func(flags ...string) []string {
		return append(append([]string{"overlay", sc.transform, sc.stack, sc.plane, "-o", out}, sc.imageFlags()...), flags...)
	}
	tests := []struct {
		name string
		args []string
		want []string
	}{
		{"unknown model", fit("--model", "bspline"), []string{"--model", `"bspline"`, "want auto, translation", "affine"}},
		{"empty model", fit("--model", ""), []string{"--model"}},
		{"check: unknown model", check("--model", "quadratic"), []string{"--model", `"quadratic"`}},
		{"negative smoothing", fit("--smoothing", "-1"), []string{"--smoothing", "-1 is negative"}},
		{"malformed smoothing", fit("--smoothing", "0.5.1"), []string{"--smoothing", `"0.5.1"`}},
		{"NaN smoothing", fit("--smoothing", "NaN"), []string{"--smoothing", `"NaN"`}},
		{"infinite smoothing", fit("--smoothing", "Inf"), []string{"--smoothing", `"Inf"`}},
		{"out-of-range smoothing", fit("--smoothing", "1e999"), []string{"--smoothing", `"1e999"`}},
		{"check: negative smoothing", check("--smoothing", "-0.1"), []string{"--smoothing", "negative"}},
		{"zero source voxel", fit("--source-voxel", "1,0,1"), []string{"--source-voxel", "Y is not positive"}},
		{"negative target voxel", fit("--target-voxel", "-1,1,1"), []string{"--target-voxel", "X is not positive"}},
		{"malformed source voxel", fit("--source-voxel", "1,x,1"), []string{"--source-voxel", `Y: "x" is not a number`}},
		{"two-number target voxel", fit("--target-voxel", "1,1"), []string{"--target-voxel", "want 3 positive numbers", "2 numbers"}},
		{"four-number source voxel", fit("--source-voxel", "1,1,1,1"), []string{"--source-voxel", "4 numbers"}},
		{"infinite source voxel", fit("--source-voxel", "1,Inf,1"), []string{"--source-voxel", "infinite"}},
		{"check: zero source sd", check("--source-sd", "0,1,1"), []string{"--source-sd", "X is not positive"}},
		{"negative target sd", fit("--target-sd", "1,1,-2"), []string{"--target-sd", "Z is not positive"}},
		{"malformed target sd", fit("--target-sd", "1;1;1"), []string{"--target-sd", "1 number"}},
		{"NaN source sd", fit("--source-sd", "1,NaN,1"), []string{"--source-sd", "finite"}},
		{"3 numbers in 2-D", []string{"fit", twoD, "-o", out, "--source-sd", "1,1,1"}, []string{"--source-sd", "want 2 positive numbers X,Y", "3 numbers"}},
		{"empty exclude item", fit("--exclude", "L01,,L02"), []string{"--exclude", "empty id (item 2)"}},
		{"exclude id twice", fit("--exclude", "L01,L01"), []string{"--exclude", `id "L01" given twice`}},
		{"missing -o", []string{"fit", fx.landmarks}, []string{"-o", "required"}},
		{"blank -o", []string{"fit", fx.landmarks, "-o", " "}, []string{"-o", "required"}},
		{"-o a folder", []string{"fit", fx.landmarks, "-o", dir}, []string{"-o " + dir, "is a folder"}},
		{"zero max error", check("--max-error", "0"), []string{"--max-error", "positive"}},
		{"negative max error", check("--max-error", "-2"), []string{"--max-error", "positive"}},
		{"infinite max error", check("--max-error", "Inf"), []string{"--max-error", "finite"}},
		{"malformed max error", check("--max-error", "2um"), []string{"--max-error", `"2um"`}},
		{"zero cell sd", mapCells("--cell-sd", "0,1,1"), []string{"--cell-sd", "X is not positive"}},
		{"malformed cell sd", mapCells("--cell-sd", "1,1,z"), []string{"--cell-sd", `Z: "z" is not a number`}},
		{"two-number cell sd", mapCells("--cell-sd", "1,1"), []string{"--cell-sd", "2 numbers"}},
		{"map: missing -o", []string{"map", fx.transform, fx.cells}, []string{"-o", "required"}},
		{"map: one argument", []string{"map", fx.transform, "-o", out}, []string{"map: missing CELLS"}},
		{"negative target z", resample("--target-z", "-1"), []string{"--target-z", "-1 is negative"}},
		{"malformed target z", resample("--target-z", "1.5"), []string{"--target-z", `"1.5"`}},
		{"resample: zero source voxel", resample("--source-voxel", "0,1,1"), []string{"--source-voxel", "not positive"}},
		{"resample: two-number target voxel", resample("--target-voxel", "1,1"), []string{"--target-voxel", "2 numbers"}},
		{"resample: missing --like", []string{"resample", sc.transform, sc.stack, "-o", out}, []string{"--like", "required"}},
		{"resample: missing -o", []string{"resample", sc.transform, sc.stack, "--like", sc.plane}, []string{"-o", "required"}},
		{"resample: no voxel size anywhere", []string{"resample", sc.transform, sc.uncalibratedStack(t), "--like", sc.plane, "-o", out}, []string{"--source-voxel", "records no voxel size"}},
		{"overlay: negative target z", overlay("--target-z", "-3"), []string{"--target-z", "negative"}},
		{"overlay: missing -o", []string{"overlay", sc.transform, sc.stack, sc.plane}, []string{"-o", "required"}},
		{"simulate: no folder", []string{"simulate"}, []string{"simulate: missing DIR"}},
		{"simulate: negative seed", []string{"simulate", dir, "--seed", "-1"}, []string{"--seed", `"-1"`}},
		{"demo: two folders", []string{"demo", dir, dir}, []string{"want at most 1 (DIR)"}},
		{"unknown flag", fit("--smooth", "1"), []string{"unknown flag: --smooth"}},
		{"unknown command", []string{"register", fx.landmarks}, []string{`unknown command "register"`}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			before := snapshot(t, dir)
			oneLine(t, ferry(t, tc.args...), tc.want...)
			if diff := sameFolder(before, snapshot(t, dir)); diff != "" {
				t.Errorf("refused flags left the folder changed: %s", diff)
			}
		})
	}
}

// TestOutputNamesAnInput wants every command refuse an -o that is one of its
// inputs, by name, by another spelling or through a link, and leave the
// input as it was.
func TestOutputNamesAnInput(t *testing.T) {
	fx := newFixture(t)
	sc := newScenarioFixture(t)
	link := filepath.Join(t.TempDir(), "link.csv")
	if err := os.Symlink(fx.cells, link); err != nil {
		t.Fatal(err)
	}
	mapped := filepath.Join(t.TempDir(), "mapped.csv")
	mustSucceed(t, "map", sc.transform, sc.files.Cells, "-o", mapped)
	img := sc.imageFlags()
	tests := []struct {
		name  string
		input string
		args  []string
	}{
		{"fit over its landmarks", fx.landmarks, []string{"fit", fx.landmarks, "-o", fx.landmarks}},
		{"fit over its landmarks, other spelling", fx.landmarks, []string{"fit", fx.landmarks, "-o", filepath.Join(fx.dir, ".", "sub", "..", "landmarks.csv")}},
		{"map over its transform", fx.transform, []string{"map", fx.transform, fx.cells, "-o", fx.transform}},
		{"map over its cells", fx.cells, []string{"map", fx.transform, fx.cells, "-o", fx.cells}},
		{"map over its cells through a link", fx.cells, []string{"map", fx.transform, fx.cells, "-o", link}},
		{"map over its cells given through a link", fx.cells, []string{"map", fx.transform, link, "-o", fx.cells}},
		{"resample over its stack", sc.stack, append([]string{"resample", sc.transform, sc.stack, "--like", sc.plane, "-o", sc.stack}, img...)},
		{"resample over its plane", sc.plane, append([]string{"resample", sc.transform, sc.stack, "--like", sc.plane, "-o", sc.plane}, img...)},
		{"resample over its transform", sc.transform, append([]string{"resample", sc.transform, sc.stack, "--like", sc.plane, "-o", sc.transform}, img...)},
		{"overlay over its plane", sc.plane, append([]string{"overlay", sc.transform, sc.stack, sc.plane, "-o", sc.plane}, img...)},
		{"overlay over its --mapped", mapped, append([]string{"overlay", sc.transform, sc.stack, sc.plane, "--mapped", mapped, "-o", mapped}, img...)},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			before, err := os.ReadFile(tc.input)
			if err != nil {
				t.Fatal(err)
			}
			oneLine(t, ferry(t, tc.args...), "refusing to write over it")
			after, err := os.ReadFile(tc.input)
			if err != nil {
				t.Fatal(err)
			}
			if string(before) != string(after) {
				t.Errorf("the input %s changed", tc.input)
			}
			entries, _ := os.ReadDir(filepath.Dir(tc.input))
			for _, e := range entries {
				if strings.HasPrefix(e.Name(), ".ferry-partial-") {
					t.Errorf("temporary file %s left behind", e.Name())
				}
			}
		})
	}
}

// A usage mistake says what is wrong and shows the command's usage line;
// --version prints the version as the version command does.
func TestUsageLine(t *testing.T) {
	for _, tc := range []struct {
		args      []string
		msg, line string
	}{
		{[]string{"check"}, "ferry: check: missing LANDMARKS", "usage: ferry check LANDMARKS [flags]"},
		{[]string{"match", "t.json"}, "ferry: match: missing CELLS and CANDIDATES", "usage: ferry match TRANSFORM CELLS CANDIDATES -o MATCHES.csv [flags]"},
		{[]string{"match"}, "ferry: match: missing TRANSFORM, CELLS and CANDIDATES", "usage: ferry match TRANSFORM CELLS CANDIDATES"},
		{[]string{"export", "t.json", "-o", "d", "--bounds", "0,0,0,1,1,1", "--margin", "3"}, "ferry: export: --bounds and --margin: give one (--bounds is the field's whole box)", "usage: ferry export TRANSFORM -o DIR"},
		{[]string{"wrap", "t.json"}, `ferry: unknown command "wrap": did you mean map or warp?`, "usage: ferry COMMAND [flags] (ferry --help lists the commands)"},
		{[]string{"frobnicate"}, `ferry: unknown command "frobnicate"`, "usage: ferry COMMAND [flags]"},
		{[]string{"--bogus"}, "ferry: unknown flag: --bogus", "usage: ferry COMMAND [flags]"},
		{[]string{"warp", "t.json", "s.tif", "--memory-gib", "abc"}, `ferry: warp: --memory-gib "abc": want a number`, "usage: ferry warp TRANSFORM"},
		{[]string{"export", "t.json", "--seed", "-1"}, `ferry: export: --seed "-1": want a whole number, 0 or more`, "usage: ferry export TRANSFORM"},
		{[]string{"overlay", "t.json", "s.tif", "p.tif", "--target-z", "2.5"}, `ferry: overlay: --target-z "2.5": want a whole number`, "usage: ferry overlay TRANSFORM"},
		{[]string{"warp"}, "ferry: warp: missing TRANSFORM and SOURCE_STACK", "usage: ferry warp TRANSFORM SOURCE_STACK -o OUT.tif --voxel X,Y,Z"},
		{[]string{"warp", "t.json", "s.tif", "-o", "w.tif"}, "ferry: warp: --voxel: the output voxel size X,Y,Z in µm is required", "usage: ferry warp TRANSFORM SOURCE_STACK"},
		{[]string{"export"}, "ferry: export: missing TRANSFORM", "usage: ferry export TRANSFORM -o DIR"},
		{[]string{"fit", "a.csv", "b.csv"}, "ferry: fit: 2 arguments given (a.csv b.csv), want 1 (LANDMARKS)", "usage: ferry fit LANDMARKS"},
		{[]string{"fit", "a.csv", "--smooth", "1"}, "ferry: fit: unknown flag: --smooth", "usage: ferry fit LANDMARKS"},
	} {
		o := ferry(t, tc.args...)
		lines := strings.Split(strings.TrimSuffix(o.stderr, "\n"), "\n")
		if o.code != exitError || len(lines) != 2 || lines[0] != tc.msg || !strings.HasPrefix(lines[1], tc.line) {
			t.Errorf("ferry %s: exit %d, stderr\n%s\nwant exit 1 with\n%s\n%s…", strings.Join(tc.args, " "), o.code, o.stderr, tc.msg, tc.line)
		}
	}
	if o := ferry(t); o.code != exitOK || !strings.Contains(o.stdout, "Available Commands") {
		t.Errorf("ferry alone: exit %d, stdout %q; want its help", o.code, o.stdout)
	}
	v, w := ferry(t, "--version"), ferry(t, "version")
	if v.code != exitOK || v.stdout != w.stdout || !strings.HasPrefix(v.stdout, "ferry ") {
		t.Errorf("--version printed %q (exit %d), version %q", v.stdout, v.code, w.stdout)
	}
}
