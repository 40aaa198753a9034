package imaging

import (
	"context"
	"math/rand/v2"
	"path/filepath"
	"testing"

	"ferry/transform"
)

// BenchmarkWarp warps a 256 × 256 × 64 stack of 1 × 1 × 2 µm voxels
// through a thin-plate spline of 40 landmarks (each output voxel needs the
// spline's inverse) onto a grid of the same size, from memory to a TIFF on
// disk; the figure is in docs/benchmarks.md.
func BenchmarkWarp(b *testing.B) {
	s := patternStack(b, 256, 256, 64, 8)
	g := Geometry{VoxelUM: transform.Vec{1, 1, 2}}
	rng := rand.New(rand.NewPCG(7, 8))
	src, dst := make([]transform.Vec, 40), make([]transform.Vec, 40)
	for i := range src {
		src[i] = transform.Vec{rng.Float64() * 256, rng.Float64() * 256, rng.Float64() * 128}
		dst[i] = src[i].Add(transform.Vec{5 + 3*rng.NormFloat64(), -4 + 3*rng.NormFloat64(), 2 + 2*rng.NormFloat64()})
	}
	res, err := transform.Fit(transform.TPS, 3, src, dst, transform.Options{Smoothing: 10})
	if err != nil {
		b.Fatal(err)
	}
	opt := WarpOptions{VoxelUM: transform.Vec{1, 1, 2}}
	bounds := [2]transform.Vec{{0, 0, 0}, {255, 255, 126}}
	opt.Bounds = &bounds
	grid, err := PlanWarp(res.Transform, s, g, opt)
	if err != nil {
		b.Fatal(err)
	}
	out := filepath.Join(b.TempDir(), "warped.tif")
	b.ResetTimer()
	for range b.N {
		if _, err := Warp(context.Background(), out, res.Transform, MemoryPages(s), g, grid, opt, nil); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(grid.Voxels())*float64(b.N)/b.Elapsed().Seconds()/1e6, "Mvoxels/s")
}
