package imaging_test

import (
	"context"
	"fmt"
	"log"
	"os"
	"path/filepath"

	"ferry/imaging"
	"ferry/transform"
)

// The test stacks of testdata/images hold voxel values that follow a
// pattern: (7i + 11j + 37k + 3) mod 256 for the 8-bit ones.
func ExampleReadStack() {
	s, err := imaging.ReadStack("../testdata/images/stack8_lzw.tif")
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("%d × %d pixels, %d pages of %d bits\n", s.Width, s.Height, s.Depth, s.Bits)
	fmt.Println("voxel (2, 1, 2):", s.At(2, 1, 2))
	// Output:
	// 13 × 7 pixels, 3 pages of 8 bits
	// voxel (2, 1, 2): 102
}

// A source stack is shifted by 1 µm in x on its way to the target: the
// target plane shows it moved by two of its 0.5 µm pixels, and the two
// columns the source does not reach are 0.
func ExampleResampleWithReport() {
	src, err := imaging.NewStack(6, 2, 1, 8)
	if err != nil {
		log.Fatal(err)
	}
	for i := range 6 {
		src.Set(i, 0, 0, uint16(10*i))
		src.Set(i, 1, 0, uint16(10*i+5))
	}
	shift := &transform.Linear{Model: transform.Translation, D: 3, A: transform.Identity(), T: transform.Vec{1, 0, 0}, Scale: 1}
	voxel := transform.Vec{0.5, 0.5, 1}
	grid := imaging.Grid{Width: 6, Height: 2, Voxel: voxel, Z: 0}
	out, rep, err := imaging.ResampleWithReport(shift, src, voxel, grid, imaging.ResampleOptions{})
	if err != nil {
		log.Fatal(err)
	}
	for j := range out.Height {
		for i := range out.Width {
			fmt.Printf("%3d", out.At(i, j, 0))
		}
		fmt.Println()
	}
	fmt.Printf("%.0f %% of the plane lies outside the source\n", 100*rep.OutsideShare())
	// Output:
	//   0  0  0 10 20 30
	//   0  0  5 15 25 35
	// 33 % of the plane lies outside the source
}

// An overlay of a plane with itself is pale where it is bright.
func ExampleOverlay() {
	p, err := imaging.NewStack(4, 1, 1, 8)
	if err != nil {
		log.Fatal(err)
	}
	for i := range 4 {
		p.Set(i, 0, 0, uint16(80*i))
	}
	img := imaging.Overlay(p, p, nil, imaging.OverlayOptions{LowPercent: 0.1, HighPercent: 100})
	fmt.Println(img.RGBAAt(0, 0), img.RGBAAt(3, 0))
	// Output:
	// {0 0 0 255} {255 255 233 255}
}

// A stack is warped through a shift of 2 µm along x onto a grid of its
// own voxel size: the output is the stack moved by one voxel, the column
// it does not reach 0, and the file records where its voxels lie.
func ExampleWarp() {
	src, err := imaging.NewStack(4, 1, 2, 8)
	if err != nil {
		log.Fatal(err)
	}
	for i := range 4 {
		src.Set(i, 0, 0, uint16(10*(i+1)))
		src.Set(i, 0, 1, uint16(10*(i+1)+5))
	}
	g := imaging.Geometry{VoxelUM: transform.Vec{2, 2, 3}}
	shift := &transform.Linear{Model: transform.Translation, D: 3, A: transform.Identity(), T: transform.Vec{2, 0, 0}, Scale: 1}
	bounds := [2]transform.Vec{{0, 0, 0}, {6, 0, 3}}
	opt := imaging.WarpOptions{VoxelUM: g.VoxelUM, Bounds: &bounds}
	grid, err := imaging.PlanWarp(shift, src, g, opt)
	if err != nil {
		log.Fatal(err)
	}
	dir, err := os.MkdirTemp("", "warp")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "warped.tif")
	if _, err := imaging.Warp(context.Background(), path, shift, imaging.MemoryPages(src), g, grid, opt, nil); err != nil {
		log.Fatal(err)
	}
	out, err := imaging.ReadStack(path)
	if err != nil {
		log.Fatal(err)
	}
	for k := range out.Depth {
		for i := range out.Width {
			fmt.Printf("%3d", out.At(i, 0, k))
		}
		fmt.Println()
	}
	fmt.Println(out.Geometry.Describe())
	// Output:
	//   0 10 20 30
	//   0 15 25 35
	// voxels 2 × 2 × 3 µm from ImageJ metadata
}

func ExampleOpenVolume() {
	// A crop of a stack on disk: only the pages and strips it needs are
	// read, so the stack may be larger than memory.
	v, err := imaging.OpenVolume("../testdata/images/stack16_tiled.tif")
	if err != nil {
		log.Fatal(err)
	}
	defer v.Close()
	crop, err := v.Crop(2, 3, 0, 4, 4, 2)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("stack %d × %d × %d, crop %d × %d × %d\n", v.Width, v.Height, v.Depth, crop.Width, crop.Height, crop.Depth)
	// Output: stack 37 × 21 × 2, crop 4 × 4 × 2
}
