package imaging

import (
	"math"
	"strings"
	"testing"

	"ferry/internal/remedy"
	"ferry/transform"
)

func TestSettleOrder(t *testing.T) {
	recorded := Geometry{VoxelUM: transform.Vec{0.5, 0.5, 2}, OriginUM: transform.Vec{1, 2, 4}, HasOrigin: [3]bool{true, true, true}, From: "ImageJ metadata"}
	lateral := Geometry{VoxelUM: transform.Vec{0.5, 0.5, 0}, From: "TIFF resolution tags"}
	flag := transform.Vec{1, 1, 4}
	file := transform.Vec{3, 3, 5}
	stack := func(g Geometry, depth int) *Stack {
		return &Stack{Width: 2, Height: 2, Depth: depth, Bits: 8, Geometry: g, Path: "s.tif"}
	}
	for _, tt := range []struct {
		name         string
		s            *Stack
		in           Given
		voxel, orig  transform.Vec
		from, errSay string
	}{
		{"the file's record", stack(recorded, 3), Given{Fallback: &file}, recorded.VoxelUM, recorded.OriginUM, "ImageJ metadata", ""},
		{"a flag beats the file, origin kept in voxels", stack(recorded, 3), Given{Voxel: &flag, VoxelFlag: "--source-voxel"}, flag, transform.Vec{2, 4, 8}, "--source-voxel", ""},
		{"the transform file when nothing is recorded", stack(Geometry{}, 3), Given{Fallback: &file}, file, transform.Vec{}, "the transform file", ""},
		{"lateral from the file, spacing from the transform file", stack(lateral, 3), Given{Fallback: &file}, transform.Vec{0.5, 0.5, 5}, transform.Vec{}, "TIFF resolution tags and the transform file", ""},
		{"a plane needs no spacing", stack(lateral, 1), Given{}, lateral.VoxelUM, transform.Vec{}, "TIFF resolution tags", ""},
		{"a stack does", stack(lateral, 3), Given{VoxelFlag: "--source-voxel"}, transform.Vec{}, transform.Vec{}, "", "no section spacing; give all three sides with --source-voxel"},
		{"nothing anywhere", stack(Geometry{}, 3), Given{VoxelFlag: "--target-voxel"}, transform.Vec{}, transform.Vec{}, "", "records no voxel size"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			g, err := Settle(tt.s, tt.in)
			if tt.errSay != "" {
				if err == nil || !strings.Contains(err.Error(), tt.errSay) {
					t.Fatalf("error %v, want one saying %q", err, tt.errSay)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if g.VoxelUM != tt.voxel || g.OriginUM != tt.orig || g.From != tt.from {
				t.Errorf("got %v %v from %q; want %v %v from %q", g.VoxelUM, g.OriginUM, g.From, tt.voxel, tt.orig, tt.from)
			}
		})
	}
}

func TestPlaneGrid(t *testing.T) {
	v := transform.Vec{1, 1, 2}
	placed := Geometry{VoxelUM: v, OriginUM: transform.Vec{0, 0, 20}, HasOrigin: [3]bool{true, true, true}}
	loose := Geometry{VoxelUM: v}
	plane := &Stack{Width: 3, Height: 2, Depth: 1, Bits: 8, Path: "p.tif"}
	stack := &Stack{Width: 3, Height: 2, Depth: 5, Bits: 8, Path: "s.tif"}
	z := func(n int) *int { return &n }
	for _, tt := range []struct {
		name   string
		like   *Stack
		g      Geometry
		z      *int
		planeZ float64 // µm
		page   int
		errSay string
	}{
		{"a placed plane at its own page", plane, placed, nil, 20, 0, ""},
		{"naming its own page", plane, placed, z(10), 20, 0, ""},
		{"another page", plane, placed, z(12), 0, 0, "is the section at page 10"},
		{"a loose plane goes where it is told", plane, loose, z(7), 14, 0, ""},
		{"a loose plane defaults to page 0", plane, loose, nil, 0, 0, ""},
		{"a page of a stack", stack, placed, z(13), 26, 3, ""},
		{"before the stack", stack, placed, z(9), 0, 0, "holds pages 10 to 14 (z = 20 to 28 µm; --target-z counts 2 µm sections from z = 0, so the file's first page is page 10)"},
		{"after the stack", stack, loose, z(5), 0, 0, "holds pages 0 to 4 (z = 0 to 8 µm)"},
		{"negative", stack, loose, z(-1), 0, 0, "--target-z -1 is negative"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			grid, page, err := PlaneGrid(tt.like, tt.g, tt.z)
			if tt.errSay != "" {
				// The library's message speaks of the page; a command line
				// names it by its flag, word for word otherwise.
				if err == nil || !strings.Contains(remedy.Named(err, flagOf), tt.errSay) || strings.Contains(err.Error(), "--") {
					t.Fatalf("error %v, want one saying %q when named, and no flag in words", err, tt.errSay)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if got := grid.Geometry().OriginUM[2]; got != tt.planeZ || page != tt.page {
				t.Errorf("plane at z = %g µm, page %d; want %g µm, page %d", got, page, tt.planeZ, tt.page)
			}
		})
	}
	_, _, err := PlaneGrid(stack, placed, z(9))
	if want := "the page index counts 2 µm sections from z = 0"; err == nil || !strings.Contains(err.Error(), want) {
		t.Errorf("error %v, want one saying %q", err, want)
	}
}

// TestMappedBox maps a stack's box through a known affine map: the box of
// the mapped corners is exact for it.
func TestMappedBox(t *testing.T) {
	a := &transform.Linear{Model: transform.Affine, D: 3, A: transform.Mat{{0, -2, 0}, {1, 0, 0}, {0, 0.5, 1}}, T: transform.Vec{10, 20, 30}, Scale: 1}
	g := Geometry{VoxelUM: transform.Vec{1, 2, 4}, OriginUM: transform.Vec{5, 0, -4}}
	// Box: x 4.5–14.5, y −1–9, z −6–14.
	lo, hi, ok := MappedBox(a, 10, 5, 5, g, false)
	want0, want1 := transform.Vec{10 - 18, 20 + 4.5, 30 - 0.5 - 6}, transform.Vec{10 + 2, 20 + 14.5, 30 + 4.5 + 14}
	for k := range 3 {
		if !ok || math.Abs(lo[k]-want0[k]) > 1e-9 || math.Abs(hi[k]-want1[k]) > 1e-9 {
			t.Fatalf("box %v – %v, want %v – %v", lo, hi, want0, want1)
		}
	}
}
