package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// export writes its files and prints the sampling error; bad flags and a
// grid too fine for the machine are refused with nothing written.
func TestExportCommand(t *testing.T) {
	fx := newFixture(t)
	tps := filepath.Join(fx.dir, "tps.json")
	mustSucceed(t, "fit", fx.landmarks, "--model", "tps", "-o", tps)
	mapped := filepath.Join(fx.dir, "mapped.csv")
	mustSucceed(t, "map", tps, fx.cells, "-o", mapped)
	out := filepath.Join(t.TempDir(), "export")
	o := mustSucceed(t, "export", tps, "--mapped", mapped, "--target-voxel", "0.5,0.5,1", "--spacing", "25", "-o", out)
	for _, want := range []string{"Affine part", "Sampling error", "TIFF x + D(x)", "Zarr A·(x + d(x)) + t", "Point list: 30 cells"} {
		if !strings.Contains(o.stdout, want) {
			t.Errorf("output lacks %q:\n%s", want, o.stdout)
		}
	}
	for _, f := range []string{"export.json", "affine_um.txt", "displacement_um.tif", "transform.zarr/zarr.json", "points.csv", "points.csv.json"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Errorf("%s: %v", f, err)
		}
	}
	// --bounds sets the field's box: from its lower corner, past its upper.
	boxed := filepath.Join(t.TempDir(), "boxed")
	o = mustSucceed(t, "export", tps, "--bounds", "-50,-40,-30,450,350,250", "--spacing", "25", "-o", boxed)
	if !strings.Contains(o.stdout, "21 × 17 × 13 samples, spacing 25 × 25 × 25 µm, over source x -50.0 to 450.0, y -40.0 to 360.0, z -30.0 to 270.0 µm") {
		t.Errorf("export --bounds printed\n%s", o.stdout)
	}
	// Cells outside a small box are counted in a warning that names the
	// flag to change, in the flag's form; the export itself succeeds.
	small := filepath.Join(t.TempDir(), "small")
	o = mustSucceed(t, "export", tps, "--mapped", mapped, "--target-voxel", "0.5,0.5,1", "--bounds", "0,0,0,50,50,50", "--spacing", "25", "-o", small)
	if !strings.Contains(o.stderr, "ferry: warning: ") || !strings.Contains(o.stderr, "outside the displacement field's box") ||
		!strings.Contains(o.stderr, "give --bounds X0,Y0,Z0,X1,Y1,Z1 in source µm") {
		t.Errorf("export with cells outside --bounds warned\n%s", o.stderr)
	}
	// Without a target voxel size anywhere the point list cannot be made.
	dir := t.TempDir()
	for _, tc := range []struct {
		args []string
		want []string
	}{
		{[]string{"export", tps, "-o", filepath.Join(dir, "e"), "--spacing", "0"}, []string{"--spacing", "positive"}},
		{[]string{"export", tps, "-o", filepath.Join(dir, "e"), "--spacing", "1,2"}, []string{"--spacing", "2 numbers"}},
		{[]string{"export", tps, "-o", filepath.Join(dir, "e"), "--margin", "-3"}, []string{"--margin"}},
		{[]string{"export", tps, "-o", filepath.Join(dir, "e"), "--spacing", "0.01"}, []string{"more than 20000000 samples", "give a larger --spacing or a smaller --margin"}},
		{[]string{"export", tps, "-o", filepath.Join(dir, "e"), "--spacing", "0.01", "--bounds", "0,0,0,500,500,500"}, []string{"more than 20000000 samples", "give a larger --spacing or a smaller --bounds"}},
		{[]string{"export", tps, "-o", filepath.Join(dir, "e"), "--mapped", mapped}, []string{"--target-voxel", "give --target-voxel X,Y,Z (µm per voxel)"}},
		{[]string{"export", tps, "-o", tps}, []string{"is a file, want a folder"}},
		{[]string{"export", tps}, []string{"-o", "required"}},
		{[]string{"export", tps, "-o", filepath.Join(dir, "e"), "--bounds", "0,0,0,10,10"}, []string{"--bounds", "6 numbers"}},
		{[]string{"export", tps, "-o", filepath.Join(dir, "e"), "--bounds", "0,0,10,10,10,0"}, []string{"--bounds", "upper corner"}},
	} {
		before := snapshot(t, dir)
		oneLine(t, ferry(t, tc.args...), tc.want...)
		if diff := sameFolder(before, snapshot(t, dir)); diff != "" {
			t.Errorf("%v: the folder changed: %s", tc.args, diff)
		}
	}
}
