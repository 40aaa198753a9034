package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"ferry/imaging"
	"ferry/status"
)

// uncalibratedStack is a copy of the scenario's in vivo stack whose file
// records no voxel size.
func (f scenarioFixture) uncalibratedStack(t testing.TB) string {
	t.Helper()
	s, err := imaging.ReadStack(f.stack)
	if err != nil {
		t.Fatal(err)
	}
	s.Geometry, s.Path = imaging.Geometry{}, ""
	path := filepath.Join(t.TempDir(), "uncalibrated.tif")
	if err := imaging.WriteTIFF(path, s); err != nil {
		t.Fatal(err)
	}
	return path
}

// TestImageGeometryFromFiles follows the overlay step on simulate's images
// with no geometry flags: the voxel sizes and the plane's z position come
// from the files. Where the user's values cannot be right, the command
// refuses in one line and writes nothing.
func TestImageGeometryFromFiles(t *testing.T) {
	sc := newScenarioFixture(t)
	dir := t.TempDir()
	out := filepath.Join(dir, "overlay.png")
	o := mustSucceed(t, "overlay", sc.transform, sc.stack, sc.plane, "-o", out)
	for _, w := range []string{"voxels 3 × 3 × 5 µm from ImageJ metadata", "voxels 1 × 1 × 1 µm from ImageJ metadata"} {
		if !strings.Contains(o.stdout, w) {
			t.Errorf("stdout %q does not say %q", o.stdout, w)
		}
	}
	// The plane's own page is the default, and naming it is allowed.
	z := sc.ip.TargetZ
	res := filepath.Join(dir, "res.tif")
	mustSucceed(t, "resample", sc.transform, sc.stack, "--like", sc.plane, "--target-z", itoa(z), "-o", res)
	got, err := imaging.ReadStack(res)
	if err != nil {
		t.Fatal(err)
	}
	if g := got.Geometry; g.OriginUM[2] != float64(z) || g.VoxelUM[0] != 1 {
		t.Errorf("the resampled plane records %s; want voxel 1 µm at z = %d µm", g.Describe(), z)
	}
	for _, tt := range []struct {
		name string
		args []string
		want []string
	}{
		{"another page of a plane", []string{"overlay", sc.transform, sc.stack, sc.plane, "--target-z", itoa(z + 66), "-o", out},
			[]string{"--target-z " + itoa(z+66), "the section at page " + itoa(z)}},
		{"wrong voxel size: no overlap", []string{"overlay", sc.transform, sc.stack, sc.plane, "--source-voxel", "1,1,1", "-o", out},
			[]string{"does not reach", "the stack maps to", "--source-voxel"}},
		{"page outside a stack", []string{"resample", sc.transform, sc.stack, "--inverse", "--like", sc.stack, "--target-z", "500", "-o", out},
			[]string{"--target-z 500 is outside", "pages 0 to"}},
	} {
		t.Run(tt.name, func(t *testing.T) {
			os.Remove(out)
			o := ferry(t, tt.args...)
			if o.code != exitError {
				t.Fatalf("want exit 1: %v", o)
			}
			if strings.Count(strings.TrimSpace(o.stderr), "\n") != 0 {
				t.Errorf("stderr is not one line: %q", o.stderr)
			}
			for _, w := range tt.want {
				if !strings.Contains(o.stderr, w) {
					t.Errorf("stderr %q does not say %q", o.stderr, w)
				}
			}
			if _, err := os.Stat(out); err == nil {
				t.Errorf("%s was written", out)
			}
		})
	}
}

func itoa(n int) string { return strconv.Itoa(n) }

// TestWarpCommand warps simulate's in vivo stack into the EM frame with no
// geometry flags and reads back the stack and its record; bounds the stack
// does not reach, and a missing --voxel, are refused with nothing written.
func TestWarpCommand(t *testing.T) {
	sc := newScenarioFixture(t)
	dir := t.TempDir()
	out := filepath.Join(dir, "warped.tif")
	o := mustSucceed(t, "warp", sc.transform, sc.stack, "-o", out, "--voxel", "6,6,10")
	if !strings.Contains(o.stdout, "into the target frame") || !strings.Contains(o.stdout, out+".json") {
		t.Errorf("stdout %q", o.stdout)
	}
	s, err := imaging.ReadStack(out)
	if err != nil {
		t.Fatal(err)
	}
	var rec imaging.WarpRecord
	b, err := os.ReadFile(out + ".json")
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &rec); err != nil {
		t.Fatal(err)
	}
	if rec.Frame != "target" || rec.VoxelUM != s.Geometry.VoxelUM || rec.OriginUM != s.Geometry.OriginUM ||
		rec.SizeVoxels != [3]int{s.Width, s.Height, s.Depth} || rec.VoxelUM[2] != 10 {
		t.Errorf("record %+v disagrees with the stack (%d × %d × %d, %s)", rec, s.Width, s.Height, s.Depth, s.Geometry.Describe())
	}
	if !strings.Contains(rec.Provenance.(string), "warp") {
		t.Errorf("provenance %v", rec.Provenance)
	}
	bright := 0
	for _, v := range s.Data {
		if v > 0 {
			bright++
		}
	}
	if bright < len(s.Data)/2 {
		t.Errorf("%d of %d voxels hold the stack: the default extent should be mostly inside it", bright, len(s.Data))
	}
	for _, tt := range []struct {
		name string
		args []string
		want string
	}{
		{"bounds the stack does not reach", []string{"--voxel", "5,5,5", "--bounds", "5000,5000,5000,5100,5100,5100"}, "check the voxel sizes, --bounds and the transform"},
		{"no voxel size", nil, "--voxel"},
		{"bounds of five numbers", []string{"--voxel", "5,5,5", "--bounds", "0,0,0,1,1"}, "want 6 numbers"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "w.tif")
			o := ferry(t, append([]string{"warp", sc.transform, sc.stack, "-o", out}, tt.args...)...)
			if o.code != exitError || !strings.Contains(o.stderr, tt.want) {
				t.Fatalf("want exit 1 saying %q: %v", tt.want, o)
			}
			if entries, _ := os.ReadDir(filepath.Dir(out)); len(entries) != 0 {
				t.Errorf("a refused warp wrote %d files", len(entries))
			}
		})
	}
}

// The overlay's printout names each mark colour with its status and count,
// the good statuses first.
func TestMarkKey(t *testing.T) {
	for _, tc := range []struct {
		statuses []string
		want     string
	}{
		{nil, ""},
		{[]string{"extrapolated", "ok", "ok"}, "; marks: yellow ok (2), reddish purple extrapolated (1)"},
		{[]string{"folded", "ambiguous", "isolated", "matched"}, "; marks: yellow matched (1), orange isolated (1), reddish purple ambiguous (1), vermillion folded (1)"},
	} {
		var marks []imaging.Mark
		for _, st := range tc.statuses {
			marks = append(marks, imaging.Mark{Status: status.Status(st)})
		}
		if got := markKey(marks); got != tc.want {
			t.Errorf("markKey(%v) = %q, want %q", tc.statuses, got, tc.want)
		}
	}
}

// warp reads a folder of planes as it reads the multi-page TIFF they came
// from, and its record names the folder with a checksum of its planes
// (a folder once made warp write the image and then fail on the record).
func TestWarpFolderOfPlanes(t *testing.T) {
	sc := newScenarioFixture(t)
	s, err := imaging.ReadStack(sc.stack)
	if err != nil {
		t.Fatal(err)
	}
	folder := filepath.Join(t.TempDir(), "planes")
	if err := os.Mkdir(folder, 0o755); err != nil {
		t.Fatal(err)
	}
	for k := range s.Depth {
		page, err := s.Page(k)
		if err != nil {
			t.Fatal(err)
		}
		page.Geometry, page.Path = imaging.Geometry{}, ""
		// Natural order: z2 before z10.
		if err := imaging.WriteTIFF(filepath.Join(folder, "z"+itoa(k)+".tif"), page); err != nil {
			t.Fatal(err)
		}
	}
	dir := t.TempDir()
	fromFile, fromFolder := filepath.Join(dir, "file.tif"), filepath.Join(dir, "folder.tif")
	mustSucceed(t, "warp", sc.transform, sc.stack, "--voxel", "6,6,10", "-o", fromFile)
	mustSucceed(t, "warp", sc.transform, folder, "--voxel", "6,6,10", "--source-voxel", sc.sourceVox, "-o", fromFolder)
	a, err := imaging.ReadStack(fromFile)
	if err != nil {
		t.Fatal(err)
	}
	b, err := imaging.ReadStack(fromFolder)
	if err != nil {
		t.Fatal(err)
	}
	if a.Width != b.Width || a.Height != b.Height || a.Depth != b.Depth || !slices.Equal(a.Data, b.Data) {
		t.Errorf("the folder's warp (%d × %d × %d) differs from the file's (%d × %d × %d)", b.Width, b.Height, b.Depth, a.Width, a.Height, a.Depth)
	}
	rec, err := os.ReadFile(fromFolder + ".json")
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(rec), folder+" sha256:") {
		t.Errorf("the record does not name the folder with its checksum:\n%s", rec)
	}
}

// A plane that the stack reaches only in a corner is drawn, with a warning
// on stderr naming what to check; a plane it covers draws no warning.
func TestOverlayWarnsWhenMostlyOutside(t *testing.T) {
	sc := newScenarioFixture(t)
	dir := t.TempDir()
	good := ferry(t, "overlay", sc.transform, sc.stack, sc.plane, "-o", filepath.Join(dir, "good.png"))
	if good.code != exitOK || good.stderr != "" {
		t.Errorf("the scenario's own overlay: %v", good)
	}
	// Pixels ten times too large: the plane grows tenfold along x and y,
	// and the stack covers about 1 % of it.
	o := ferry(t, "overlay", sc.transform, sc.stack, sc.plane, "--target-voxel", "10,10,1", "-o", filepath.Join(dir, "large.png"))
	if o.code != exitOK || !strings.Contains(o.stderr, "ferry: warning: ") || !strings.Contains(o.stderr, "% of the plane lies outside the stack") {
		t.Errorf("a plane mostly outside the stack: %v", o)
	}
}
