package register

import (
	"math/rand/v2"
	"testing"

	"ferry/transform"
)

// BenchmarkMap maps 100,000 cells through a 300-landmark spline with their
// uncertainty: position, posterior variance, Jacobian, covariance, r95 and
// status each. The figure goes into docs/benchmarks.md.
func BenchmarkMap(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	p := synthetic(rng, 300, warpedTruth, transform.Vec{0.8, 0.8, 2.5})
	m, _ := mapperFor(b, p, Settings{Model: transform.TPS, Smoothing: Smoothing{Value: 50}})
	cells := make([]transform.Vec, 100000)
	for i := range cells {
		cells[i] = transform.Vec{rng.Float64() * 500, rng.Float64() * 500, rng.Float64() * 300}
	}
	sd := transform.Vec{0.8, 0.8, 3}
	b.ResetTimer()
	for b.Loop() {
		m.MapAll(cells, &sd, false)
	}
	b.ReportMetric(float64(len(cells))*float64(b.N)/b.Elapsed().Seconds(), "cells/s")
}

// BenchmarkAssess runs the check on 300 landmarks with the error model:
// the field's grid of lengths and smoothnesses, the flags, the model
// comparison and the calibration. The figure goes into docs/benchmarks.md.
func BenchmarkAssess(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	p := synthetic(rng, 300, warpedTruth, transform.Vec{0.8, 0.8, 2.5})
	s := Settings{Smoothing: Smoothing{Auto: true}}
	for b.Loop() {
		if _, err := Assess(p, s); err != nil {
			b.Fatal(err)
		}
	}
}
