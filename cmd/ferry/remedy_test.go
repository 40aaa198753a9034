package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/spf13/pflag"

	"ferry/imaging"
	"ferry/internal/remedy"
	"ferry/transform"
)

// Every input a library message may ask to change has a flag, and that
// flag is one a command takes.
func TestFlagNameOfEveryInput(t *testing.T) {
	flags := map[string]bool{}
	for _, c := range newRootCommand(nil, nil).Commands() {
		c.Flags().VisitAll(func(f *pflag.Flag) { flags["--"+f.Name] = true })
	}
	for in := remedy.OutputVoxel; in <= remedy.Model; in++ {
		name := flagName(in)
		if name == "" || !flags[name] {
			t.Errorf("input %d: flag %q, want one of a command's flags", in, name)
		}
	}
	if flagName(remedy.Model+1) != "" {
		t.Error("an input past the last has a flag")
	}
}

// The library's messages speak of values; the command's name the flags,
// word for word as before the library stopped naming them.
func TestMessagesNameTheFlags(t *testing.T) {
	v := transform.Vec{1, 1, 2}
	placed := imaging.Geometry{VoxelUM: v, OriginUM: transform.Vec{0, 0, 20}, HasOrigin: [3]bool{true, true, true}}
	stack := &imaging.Stack{Width: 3, Height: 2, Depth: 5, Bits: 8, Path: "s.tif"}
	plane := &imaging.Stack{Width: 3, Height: 2, Depth: 1, Bits: 8, Path: "p.tif"}
	page := func(n int) *int { return &n }
	tilt := &transform.Linear{Model: transform.Affine, D: 3, A: transform.Mat{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}}, Scale: 1}
	for _, tt := range []struct {
		name   string
		err    func() error
		cli    string
		inWord string
	}{
		{"a page before the stack", func() error { _, _, err := imaging.PlaneGrid(stack, placed, page(9)); return err },
			"--target-z 9 is outside s.tif, which holds pages 10 to 14 (z = 20 to 28 µm; --target-z counts 2 µm sections from z = 0, so the file's first page is page 10)",
			"target page 9 is outside s.tif, which holds pages 10 to 14 (z = 20 to 28 µm; the page index counts 2 µm sections from z = 0, so the file's first page is page 10)"},
		{"a negative page", func() error { _, _, err := imaging.PlaneGrid(stack, placed, page(-1)); return err },
			"--target-z -1 is negative: want a page index ≥ 0", "target page -1 is negative: want a page index ≥ 0"},
		{"another page of a plane", func() error { _, _, err := imaging.PlaneGrid(plane, placed, page(12)); return err },
			"--target-z 12: p.tif is the section at page 10 (z = 20 µm, 2 µm sections), not page 12; leave --target-z out or give the image of page 12",
			"target page 12: p.tif is the section at page 10 (z = 20 µm, 2 µm sections), not page 12; leave the target page out or give the image of page 12"},
		{"a plane without section spacing", func() error {
			_, _, err := imaging.PlaneGrid(plane, imaging.Geometry{VoxelUM: transform.Vec{1, 1, 0}}, page(3))
			return err
		},
			"--target-z 3: p.tif records no section spacing to place page 3 at; give --target-voxel X,Y,Z in µm",
			"target page 3: p.tif records no section spacing to place page 3 at; give the target voxel size in µm"},
		{"too many voxels", func() error {
			_, err := imaging.PlanWarp(tilt, stack, placed, imaging.WarpOptions{VoxelUM: transform.Vec{1e-7, 1, 1}})
			return err
		},
			"imaging: warp: 30000001 voxels along x: at most 16777216; choose a coarser --voxel or smaller --bounds",
			"imaging: warp: 30000001 voxels along x: at most 16777216; choose a coarser output voxel size or smaller output box"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			err := tt.err()
			if err == nil {
				t.Fatal("no error")
			}
			if got := oneLineMessage(err); got != tt.cli {
				t.Errorf("command says %q, want %q", got, tt.cli)
			}
			if got := err.Error(); got != tt.inWord || strings.Contains(got, "--") {
				t.Errorf("library says %q, want %q", got, tt.inWord)
			}
		})
	}
}

// A report on a transform given another landmark file than the one it was
// fitted from is refused, naming --transform as the way to check that file.
func TestReportOtherLandmarks(t *testing.T) {
	fx := newFixture(t)
	other := writeFile(t, filepath.Join(fx.dir, "other.csv"), landmarkCSV(30))
	out := filepath.Join(fx.dir, "r.html")
	oneLine(t, ferry(t, "report", other, "--transform", fx.transform, "-o", out),
		"other.csv is not the landmark file", "(sha256 ", "give that file, or leave out --transform to check this one")
	if _, err := os.Stat(out); err == nil {
		t.Error("a report was written")
	}
}
