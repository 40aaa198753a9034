package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

const pairHeader = "id,kind,source_x,source_y,source_z,target_x,target_y,target_z\n"

// goodPairRows are eight landmark rows (lines 2 to 9 after pairHeader),
// spread in 3-D, that the bad rows of the cases below follow.
var goodPairRows = pairRows(8)

// pairRows are the rows of landmarkCSV(n) without its header and note
// column.
func pairRows(n int) string {
	var b strings.Builder
	for _, line := range strings.Split(strings.TrimSpace(landmarkCSV(n)), "\n")[2:] {
		f := strings.Split(line, ",")
		b.WriteString(strings.Join(f[:8], ",") + "\n")
	}
	return b.String()
}

// planeRows are landmarks on the plane z = 5 in both spaces.
const planeRows = `p1,vessel,0,0,5,1,0,5
p2,vessel,100,0,5,101,2,5
p3,vessel,0,100,5,0,99,5
p4,vessel,100,100,5,102,101,5
p5,soma,50,30,5,51,30,5
p6,soma,30,70,5,30,71,5
p7,vessel,80,20,5,81,21,5
p8,vessel,20,40,5,20,40,5
`

// TestBadLandmarks feeds fit and check landmark files with one fault each
// and wants exit 1, one line on stderr naming the file, the line and the
// column where they apply, and no output written.
func TestBadLandmarks(t *testing.T) {
	tests := []struct {
		name    string
		content string
		flags   []string
		// want holds the parts of the message after the file name;
		// "FILE" stands for the file's path.
		want []string
	}{
		{"missing column", "id,kind,source_x,source_y,source_z,target_x,target_y\nL1,vessel,1,2,3,4,5\n",
			nil, []string{"FILE:1: ", `column "target_z": missing`}},
		{"missing kind column", "id,source_x,source_y,source_z,target_x,target_y,target_z\nL1,1,2,3,4,5,6\n",
			nil, []string{"FILE:1: ", `column "kind": missing from the header`}},
		{"cells table for landmarks", "id,x,y,z\nc1,1,2,3\n",
			nil, []string{"FILE:1: ", `column "kind": missing`, "looks like a cells or candidates table"}},
		{"not a number", pairHeader + goodPairRows + "L99,vessel,1,abc,3,4,5,6\n",
			nil, []string{"FILE:10: ", `column "source_y": "abc" is not a number`}},
		{"decimal comma", pairHeader + goodPairRows + "L99,vessel,1,\"2,5\",3,4,5,6\n",
			nil, []string{"FILE:10: ", `column "source_y"`, "decimal mark"}},
		{"NaN", pairHeader + goodPairRows + "L99,vessel,1,2,NaN,4,5,6\n",
			nil, []string{"FILE:10: ", `column "source_z": "NaN"`, "finite"}},
		{"Inf", pairHeader + goodPairRows + "L99,vessel,1,2,3,4,5,-Inf\n",
			nil, []string{"FILE:10: ", `column "target_z": "-Inf" is infinite`}},
		{"out of range", pairHeader + goodPairRows + "L99,vessel,1,2,3,4,1e999,6\n",
			nil, []string{"FILE:10: ", `column "target_y"`, "out of range"}},
		{"empty field", pairHeader + goodPairRows + "L99,vessel,1,,3,4,5,6\n",
			nil, []string{"FILE:10: ", `column "source_y": empty`}},
		{"duplicate id", pairHeader + goodPairRows + "L03,vessel,1,2,3,4,5,6\n",
			nil, []string{"FILE:10: ", `column "id": id "L03" already used on line 4`}},
		{"empty id", pairHeader + goodPairRows + ",vessel,1,2,3,4,5,6\n",
			nil, []string{"FILE:10: ", `column "id": empty id`}},
		{"short row", pairHeader + goodPairRows + "L99,vessel,1,2,3,4,5\n",
			nil, []string{"FILE:10: ", `column "target_z": missing: the row has 7 fields but the header has 8 columns`}},
		{"long row", pairHeader + goodPairRows + "L99,vessel,1,2,3,4,5,6,7\n",
			nil, []string{"FILE:10: ", "the row has 9 fields but the header has 8 columns"}},
		{"unknown kind", pairHeader + goodPairRows + "L99,artery,1,2,3,4,5,6\n",
			nil, []string{"FILE:10: ", `column "kind": "artery" is not a landmark kind`}},
		{"bare quote", pairHeader + goodPairRows + "L9\"9,vessel,1,2,3,4,5,6\n",
			nil, []string{"FILE:10: ", "quote"}},
		{"fault after a comment and a blank line", pairHeader + "# a comment\n\n" + goodPairRows + "L99,vessel,1,2,x,4,5,6\n",
			nil, []string{"FILE:12: ", `column "source_z": "x" is not a number`}},
		{"CRLF line ends", strings.ReplaceAll(pairHeader+goodPairRows+"L99,vessel,1,2,3,4,5,six\n", "\n", "\r\n"),
			nil, []string{"FILE:10: ", `column "target_z": "six" is not a number`}},
		{"empty file", "", nil, []string{"FILE: ", "empty file"}},
		{"header only", pairHeader, nil, []string{"FILE: ", "no landmark pairs"}},
		{"comments only", "# nothing\n# here\n", nil, []string{"FILE: ", "no header row"}},
		{"binary file", "II*\x00\x08\x00\x00\x00\x00\x01\x02", nil, []string{"FILE:1: ", "not a text file"}},
		{"Latin-1 text", pairHeader + goodPairRows + "L99,vessel,1,2,3,4,5,6,\xe9\n",
			nil, []string{"FILE:10: ", "not UTF-8"}},
		{"UTF-16 file", "\xff\xfei\x00d\x00", nil, []string{"FILE:1: ", "UTF-16"}},
		{"unknown --exclude id", pairHeader + goodPairRows, []string{"--exclude", "L03,nope"},
			[]string{`--exclude: no landmark with id "nope" in FILE`}},
		{"--exclude every landmark", pairHeader + "a,vessel,1,2,3,4,5,6\nb,vessel,7,8,9,1,2,3\n", []string{"--exclude", "a,b"},
			[]string{"--exclude: excludes all 2 landmark pairs of FILE"}},
		{"too few for affine", pairHeader + strings.Join(strings.SplitAfter(goodPairRows, "\n")[:4], ""), []string{"--model", "affine"},
			[]string{"FILE: ", "affine model in 3-D needs at least 5 landmark pairs", "have 4"}},
		{"too few for tps", pairHeader + strings.Join(strings.SplitAfter(goodPairRows, "\n")[:3], ""), []string{"--model", "tps"},
			[]string{"FILE: ", "tps model in 3-D needs at least 5 landmark pairs", "have 3"}},
		{"too few for rigid", pairHeader + strings.Join(strings.SplitAfter(goodPairRows, "\n")[:3], ""), []string{"--model", "rigid"},
			[]string{"FILE: ", "rigid model in 3-D needs at least 4 landmark pairs", "have 3"}},
		{"on a plane for affine", pairHeader + planeRows, []string{"--model", "affine"},
			[]string{"FILE: ", "lie on a plane", "affine model"}},
		{"on a plane for tps", pairHeader + planeRows, []string{"--model", "tps"},
			[]string{"FILE: ", "lie on a plane", "tps model"}},
		{"on a line for rigid", pairHeader + "a,vessel,0,0,0,0,0,0\nb,vessel,1,1,1,1,1,1\nc,vessel,2,2,2,2,2,2\nd,vessel,3,3,3,3,3,3\ne,vessel,4,4,4,4,4,4\n",
			[]string{"--model", "rigid"}, []string{"FILE: ", "lie on a straight line", "rigid model"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			path := writeFile(t, filepath.Join(dir, "landmarks.csv"), tc.content)
			want := naming(path, tc.want)
			for _, command := range []string{"fit", "check"} {
				args := append([]string{command, path}, tc.flags...)
				if command == "fit" {
					args = append(args, "-o", filepath.Join(dir, "transform.json"))
				}
				refusesAndWritesNothing(t, dir, args, want)
			}
		})
	}
}

// refusesAndWritesNothing runs args twice, with no output file and with an
// earlier one in place, wants the error of oneLine each time and the folder
// exactly as it was.
func refusesAndWritesNothing(t *testing.T, dir string, args, want []string) {
	t.Helper()
	out := ""
	for i, a := range args {
		if a == "-o" && i+1 < len(args) {
			out = args[i+1]
		}
	}
	before := snapshot(t, dir)
	oneLine(t, ferry(t, args...), want...)
	if diff := sameFolder(before, snapshot(t, dir)); diff != "" {
		t.Errorf("%s: a failed run left the folder changed: %s", args[0], diff)
	}
	if out == "" {
		return
	}
	writeFile(t, out, "an earlier output\n")
	before = snapshot(t, dir)
	oneLine(t, ferry(t, args...), want...)
	if diff := sameFolder(before, snapshot(t, dir)); diff != "" {
		t.Errorf("%s over an earlier output: %s", args[0], diff)
	}
	os.Remove(out)
}

// TestBadCells feeds map cells files with one fault each.
func TestBadCells(t *testing.T) {
	fx := newFixture(t)
	good := "c1,10,20,30\nc2,40,50,60\nc3,70,80,90\n"
	tests := []struct {
		name, content string
		flags         []string
		want          []string
	}{
		{"missing z with an extra column", "id,x,y,note\nc1,1,2,a\n", nil, []string{"FILE: ", "2-D cells for a 3-D transform"}},
		{"missing x", "id,y,z\nc1,2,3\n", nil, []string{"FILE:1: ", `column "x": missing from the header`}},
		{"landmarks for cells", pairHeader + goodPairRows, nil, []string{"FILE:1: ", `column "x"`, "looks like a landmark pairs table"}},
		{"no header", "1,2,3,4\n5,6,7,8\n", nil, []string{"FILE:1: ", "is the header row missing?"}},
		{"not a number", "id,x,y,z\n" + good + "c4,1,2,3.3.3\n", nil, []string{"FILE:5: ", `column "z": "3.3.3" is not a number`}},
		{"NaN", "id,x,y,z\n" + good + "c4,nan,2,3\n", nil, []string{"FILE:5: ", `column "x": "nan"`, "finite"}},
		{"Inf", "id,x,y,z\n" + good + "c4,1,+Inf,3\n", nil, []string{"FILE:5: ", `column "y": "+Inf" is infinite`}},
		{"hexadecimal", "id,x,y,z\n" + good + "c4,0x1p4,2,3\n", nil, []string{"FILE:5: ", `column "x": "0x1p4" is not a decimal number`}},
		{"duplicate id", "id,x,y,z\n" + good + "c2,1,2,3\n", nil, []string{"FILE:5: ", `column "id": id "c2" already used on line 3`}},
		{"short row", "id,x,y,z,osi\n" + "c1,1,2,3,0.5\nc2,1,2\n", nil, []string{"FILE:3: ", `column "z": missing: the row has 3 fields`}},
		{"empty file", "", nil, []string{"FILE: ", "empty file"}},
		{"byte-order mark only", "\xef\xbb\xbf", nil, []string{"FILE: ", "nothing but a byte-order mark"}},
		{"header only", "id,x,y,z\n", nil, []string{"FILE: ", "no cells"}},
		{"binary file", "\x89PNG\r\n\x1a\n\x00\x00\x00\x0dIHDR", nil, []string{"FILE:1: ", "not UTF-8"}},
		{"NUL byte late", "id,x,y,z\n" + good + "c4,1,2,3\x00\n", nil, []string{"FILE:5: ", "NUL byte"}},
		{"unclosed quote", "id,x,y,z\n" + good + "\"c4,1,2,3\nc5,1,2,3\n", nil, []string{"FILE:", "quoted field that starts on line 5"}},
		{"header named twice", "id,x,y,z,X\nc1,1,2,3,4\n", nil, []string{"FILE:1: ", `column "X": named twice`}},
		{"--cell-sd of two numbers", "id,x,y,z\n" + good, []string{"--cell-sd", "1,1"}, []string{"--cell-sd", "want 3 positive numbers", "2 numbers"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			path := writeFile(t, filepath.Join(dir, "cells.csv"), tc.content)
			want := naming(path, tc.want)
			for _, inverse := range []bool{false, true} {
				args := append([]string{"map", fx.transform, path, "-o", filepath.Join(dir, "mapped.csv")}, tc.flags...)
				if inverse {
					args = append(args, "--inverse")
				}
				refusesAndWritesNothing(t, dir, args, want)
			}
		})
	}
}

// TestBadTransformFiles gives map transform files that are not one, damaged
// or of a newer version.
func TestBadTransformFiles(t *testing.T) {
	fx := newFixture(t)
	good, err := os.ReadFile(fx.transform)
	if err != nil {
		t.Fatal(err)
	}
	text := string(good)
	tests := []struct {
		name, content string
		want          []string
	}{
		{"empty", "", []string{"FILE:", "not a ferry transform file"}},
		{"a CSV table", pairHeader + goodPairRows, []string{"FILE:", "not a ferry transform file"}},
		{"truncated", text[:len(text)/2], []string{"FILE:", "not a ferry transform file (damaged"}},
		{"white space added", strings.Replace(text, `"units": "micrometre"`, `"units":    "micrometre"`, 1) + "\n\n", nil},
		{"a number changed", strings.Replace(text, `"smoothing": `, `"smoothing": 1`, 1), []string{"FILE: ", "does not match its checksum"}},
		{"newer version", strings.Replace(text, `"version": 1`, `"version": 99`, 1), []string{"FILE: ", "version 99 is newer"}},
		{"another format", strings.Replace(text, `"format": "ferry-transform"`, `"format": "something-else"`, 1), []string{"FILE: ", `format "something-else"`}},
		{"binary", "\x00\x01\x02\x03", []string{"FILE:", "not a ferry transform file"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			path := writeFile(t, filepath.Join(dir, "t.json"), tc.content)
			if tc.want == nil {
				// White space outside the values is no damage.
				mustSucceed(t, "map", path, fx.cells, "-o", filepath.Join(dir, "mapped.csv"))
				return
			}
			want := naming(path, tc.want)
			refusesAndWritesNothing(t, dir, []string{"map", path, fx.cells, "-o", filepath.Join(dir, "mapped.csv")}, want)
		})
	}
	t.Run("missing", func(t *testing.T) {
		dir := t.TempDir()
		path := filepath.Join(dir, "none.json")
		refusesAndWritesNothing(t, dir, []string{"map", path, fx.cells, "-o", filepath.Join(dir, "mapped.csv")}, []string{path, "no such file"})
	})
}

// TestBadImages gives resample and overlay files that are not images.
func TestBadImages(t *testing.T) {
	sc := newScenarioFixture(t)
	dir := t.TempDir()
	notImage := writeFile(t, filepath.Join(dir, "stack.tif"), "id,x,y,z\n")
	stack, err := os.ReadFile(sc.stack)
	if err != nil {
		t.Fatal(err)
	}
	truncated := filepath.Join(dir, "truncated.tif")
	if err := os.WriteFile(truncated, stack[:len(stack)/3], 0o644); err != nil {
		t.Fatal(err)
	}
	vox := sc.imageFlags()
	tests := []struct {
		name string
		args []string
		want []string
	}{
		{"stack not an image", append([]string{"resample", sc.transform, notImage, "--like", sc.plane}, vox...), []string{notImage, "neither a TIFF nor a PNG"}},
		{"plane not an image", append([]string{"resample", sc.transform, sc.stack, "--like", notImage}, vox...), []string{notImage, "neither a TIFF nor a PNG"}},
		{"truncated stack", append([]string{"resample", sc.transform, truncated, "--like", sc.plane}, vox...), []string{truncated}},
		{"overlay, truncated stack", append([]string{"overlay", sc.transform, truncated, sc.plane}, vox...), []string{truncated}},
		{"overlay, landmarks as --mapped", append([]string{"overlay", sc.transform, sc.stack, sc.plane, "--mapped", sc.files.Landmarks}, vox...),
			[]string{sc.files.Landmarks + ":1: ", `column "x"`}},
		{"overlay, 2-D --mapped", append([]string{"overlay", sc.transform, sc.stack, sc.plane, "--mapped",
			writeFile(t, filepath.Join(dir, "mapped2d.csv"), "id,x,y,status\nc1,1,2,ok\n")}, vox...),
			[]string{filepath.Join(dir, "mapped2d.csv"), "2-D"}},
		{"2-D transform", append([]string{"resample", newFixture2D(t), sc.stack, "--like", sc.plane}, vox...), []string{"images need a 3-D transform"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			out := filepath.Join(dir, "out.tif")
			if tc.args[0] == "overlay" {
				out = filepath.Join(dir, "out.png")
			}
			refusesAndWritesNothing(t, dir, append(tc.args, "-o", out), tc.want)
		})
	}
}

// newFixture2D fits a 2-D transform and returns its path.
func newFixture2D(t *testing.T) string {
	dir := t.TempDir()
	var b strings.Builder
	b.WriteString("id,kind,source_x,source_y,target_x,target_y\n")
	for _, line := range strings.Split(strings.TrimSpace(pairRows(20)), "\n") {
		f := strings.Split(line, ",")
		b.WriteString(strings.Join([]string{f[0], f[1], f[2], f[3], f[5], f[6]}, ",") + "\n")
	}
	path := writeFile(t, filepath.Join(dir, "landmarks2d.csv"), b.String())
	out := filepath.Join(dir, "t2d.json")
	mustSucceed(t, "fit", path, "-o", out)
	return out
}
