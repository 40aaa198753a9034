package imaging

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"testing"

	"ferry/internal/remedy"
	"ferry/transform"
)

// warpFixture is a 16-bit pattern stack written to a TIFF, and a rotation
// about z with a shift that carries every output plane across several
// input pages.
func warpFixture(t testing.TB) (string, *Stack, transform.Transform) {
	t.Helper()
	s := patternStack(t, 40, 30, 24, 16)
	s.Geometry = Geometry{VoxelUM: transform.Vec{1, 1, 2}, HasOrigin: [3]bool{true, true, true}}
	path := filepath.Join(t.TempDir(), "in.tif")
	if err := WriteTIFF(path, s); err != nil {
		t.Fatal(err)
	}
	tilt := &transform.Linear{Model: transform.Affine, D: 3,
		A: transform.Mat{{0.98, 0, 0.2}, {0, 1, 0}, {-0.2, 0, 0.98}}, T: transform.Vec{3, -2, 5}}
	return path, s, tilt
}

// TestWarpStreams warps from the file page by page with a memory bound of
// a few pages and wants the same bytes as from memory with no bound, every
// page read, and never more held than the bound allows.
func TestWarpStreams(t *testing.T) {
	path, s, tilt := warpFixture(t)
	g := s.Geometry
	opt := WarpOptions{VoxelUM: transform.Vec{1.5, 1.5, 1}}
	grid, err := PlanWarp(tilt, s, g, opt)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	whole := filepath.Join(dir, "whole.tif")
	if _, err := Warp(context.Background(), whole, tilt, MemoryPages(s), g, grid, opt, nil); err != nil {
		t.Fatal(err)
	}
	pages, err := OpenPages(path)
	if err != nil {
		t.Fatal(err)
	}
	defer pages.Close()
	streamed := filepath.Join(dir, "streamed.tif")
	small := opt
	small.MemoryBytes = 10 * 40 * 30 * 2 // ten pages
	rep, err := Warp(context.Background(), streamed, tilt, pages, pages.Header().Geometry, grid, small, nil)
	if err != nil {
		t.Fatal(err)
	}
	a, _ := os.ReadFile(whole)
	b, _ := os.ReadFile(streamed)
	if !bytes.Equal(a, b) {
		t.Fatal("the streamed warp differs from the warp in memory")
	}
	if rep.PagesRead < s.Depth || rep.MostPagesHeld > 10 || rep.MostPagesHeld < 2 {
		t.Errorf("%d pages read, at most %d held, with room for 10 of %d", rep.PagesRead, rep.MostPagesHeld, s.Depth)
	}
	if rep.Outside == 0 || rep.Outside == rep.Pixels {
		t.Errorf("%d of %d voxels outside: the default extent should hold the stack with some margin", rep.Outside, rep.Pixels)
	}
	// Too small a bound for the rows' reach is refused with the reason.
	tiny := opt
	tiny.MemoryBytes = 1
	_, err = Warp(context.Background(), filepath.Join(dir, "tiny.tif"), tilt, pages, pages.Header().Geometry, grid, tiny, nil)
	if err == nil || !strings.Contains(err.Error(), "more than the 2 that fit") {
		t.Errorf("error %v, want a refusal naming the memory bound", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "tiny.tif")); err == nil {
		t.Error("a refused warp left its file")
	}
}

func TestWarpInterrupted(t *testing.T) {
	_, s, tilt := warpFixture(t)
	opt := WarpOptions{VoxelUM: transform.Vec{1, 1, 1}}
	grid, err := PlanWarp(tilt, s, s.Geometry, opt)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	out := filepath.Join(t.TempDir(), "out.tif")
	_, err = Warp(ctx, out, tilt, MemoryPages(s), s.Geometry, grid, opt, nil)
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("error %v, want the cancellation", err)
	}
	if entries, _ := os.ReadDir(filepath.Dir(out)); len(entries) != 0 {
		t.Errorf("an interrupted warp left %d files", len(entries))
	}
}

func TestPlanWarp(t *testing.T) {
	_, s, tilt := warpFixture(t)
	g := s.Geometry
	// Given bounds: voxel (0, 0, 0) at X0, as many voxels as fit up to X1.
	b := [2]transform.Vec{{-3, 0, 10}, {12, 5.9, 10}}
	grid, err := PlanWarp(tilt, s, g, WarpOptions{VoxelUM: transform.Vec{1.5, 2, 1}, Bounds: &b})
	if err != nil {
		t.Fatal(err)
	}
	if grid.Size != [3]int{11, 3, 1} || grid.OriginUM != b[0] {
		t.Errorf("grid %v voxels at %v, want [11 3 1] at %v", grid.Size, grid.OriginUM, b[0])
	}
	// The default extent holds the mapped box, on whole voxels.
	lo, hi, _ := MappedBox(tilt, s.Width, s.Height, s.Depth, g, false)
	grid, err = PlanWarp(tilt, s, g, WarpOptions{VoxelUM: transform.Vec{2, 2, 2}})
	if err != nil {
		t.Fatal(err)
	}
	for a := range 3 {
		end := grid.OriginUM[a] + float64(grid.Size[a]-1)*2
		if grid.OriginUM[a] > lo[a] || end < hi[a] || end-2 >= hi[a] || grid.OriginUM[a]+2 <= lo[a] {
			t.Errorf("axis %d: grid %g–%g µm does not hold the mapped box %g–%g µm snugly", a, grid.OriginUM[a], end, lo[a], hi[a])
		}
	}
	// Bounds the stack does not reach are refused, saying where it maps.
	far := [2]transform.Vec{{500, 500, 500}, {600, 600, 600}}
	if _, err := PlanWarp(tilt, s, g, WarpOptions{VoxelUM: transform.Vec{1, 1, 1}, Bounds: &far}); err == nil || !strings.Contains(err.Error(), "does not reach the output box: the stack maps to x") ||
		!strings.Contains(remedy.Named(err, flagOf), "does not reach --bounds: the stack maps to x") {
		t.Errorf("error %v, want a refusal of bounds the stack does not reach", err)
	}
	// Too large for a classic TIFF: refused before anything is written,
	// with the way out.
	huge, err := PlanWarp(tilt, s, g, WarpOptions{VoxelUM: transform.Vec{0.01, 0.01, 0.05}})
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(t.TempDir(), "huge.tif")
	if err := huge.CheckWritable(out, 16); err == nil || !strings.Contains(err.Error(), "4 GiB") || !strings.Contains(err.Error(), "coarser output voxel size or a smaller output box") ||
		!strings.Contains(remedy.Named(err, flagOf), "coarser --voxel or a smaller --bounds") {
		t.Errorf("error %v, want a refusal naming the 4 GiB limit and the way out", err)
	}
}

// TestWarpSameBytesAnyCores warps on one core and on all and wants the same
// file: every output voxel is computed on its own, in no order that
// depends on scheduling.
func TestWarpSameBytesAnyCores(t *testing.T) {
	_, s, tilt := warpFixture(t)
	opt := WarpOptions{VoxelUM: transform.Vec{0.7, 0.9, 1.3}}
	grid, err := PlanWarp(tilt, s, s.Geometry, opt)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	var files [2][]byte
	for n, procs := range []int{1, 4} {
		old := runtime.GOMAXPROCS(procs)
		path := filepath.Join(dir, fmt.Sprintf("w%d.tif", procs))
		_, err := Warp(context.Background(), path, tilt, MemoryPages(s), s.Geometry, grid, opt, nil)
		runtime.GOMAXPROCS(old)
		if err != nil {
			t.Fatal(err)
		}
		files[n], _ = os.ReadFile(path)
	}
	if !bytes.Equal(files[0], files[1]) {
		t.Error("the warp on one core differs from the warp on four")
	}
}

// TestOpenPagesReadsWhatReadStackReads opens every kind of stack page by
// page and wants ReadStack's voxels and geometry.
func TestOpenPagesReadsWhatReadStackReads(t *testing.T) {
	for _, name := range []string{"stack16_deflate.tif", "stack8_lzw.tif", "stack16_tiled.tif", "imagej16.tif", "planes", "plane16.png"} {
		t.Run(name, func(t *testing.T) {
			path := filepath.Join(testdata, name)
			want, err := ReadStack(path)
			if err != nil {
				t.Fatal(err)
			}
			p, err := OpenPages(path)
			if err != nil {
				t.Fatal(err)
			}
			defer p.Close()
			h := p.Header()
			if h.Width != want.Width || h.Height != want.Height || h.Depth != want.Depth || h.Bits != want.Bits || h.Geometry != want.Geometry {
				t.Fatalf("header %d × %d × %d of %d bits, %+v; ReadStack says %d × %d × %d of %d bits, %+v",
					h.Width, h.Height, h.Depth, h.Bits, h.Geometry, want.Width, want.Height, want.Depth, want.Bits, want.Geometry)
			}
			page := make([]uint16, h.Width*h.Height)
			for k := h.Depth - 1; k >= 0; k-- { // any order
				if err := p.ReadPage(k, page); err != nil {
					t.Fatal(err)
				}
				if !slices.Equal(page, want.PageData(k)) {
					t.Fatalf("page %d differs from ReadStack's", k)
				}
			}
			if err := p.ReadPage(h.Depth, page); err == nil || !strings.Contains(err.Error(), "the stack has pages 0 to") {
				t.Errorf("page %d of %d: error %v", h.Depth, h.Depth, err)
			}
		})
	}
}

// flagOf names the inputs of a message as ferry's command line does.
func flagOf(in remedy.Input) string {
	return map[remedy.Input]string{remedy.OutputVoxel: "--voxel", remedy.OutputBox: "--bounds", remedy.MemoryLimit: "--memory-gib",
		remedy.TargetPage: "--target-z", remedy.TargetVoxel: "--target-voxel"}[in]
}
