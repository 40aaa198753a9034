package register

import (
	"math/rand/v2"
	"strconv"
	"syscall"
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

// BenchmarkAssessLarge runs the check with default settings (model and
// smoothing chosen automatically) on 1,000 and 2,000 landmarks of a warped
// volume, five of them wrong by 25 µm so that the flags' sequential
// deletion runs too. The figures go into docs/benchmarks.md.
func BenchmarkAssessLarge(b *testing.B) {
	for _, n := range []int{1000, 2000} {
		rng := rand.New(rand.NewPCG(uint64(n), 3))
		p := synthetic(rng, n, warpedTruth, transform.Vec{0.8, 0.8, 2.5})
		for i := range 5 {
			p.Target[i*97][0] += 25
		}
		b.Run(strconv.Itoa(n), func(b *testing.B) {
			cpu0 := cpuSeconds()
			for b.Loop() {
				if _, err := Assess(p, Settings{Smoothing: Smoothing{Auto: true}}); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric((cpuSeconds()-cpu0)/float64(b.N), "cpu_s/op")
		})
	}
}

// cpuSeconds is the CPU time (user and system) this process has used: on a
// machine shared with other work it moves far less than the wall time.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return float64(ru.Utime.Sec+ru.Stime.Sec) + float64(ru.Utime.Usec+ru.Stime.Usec)/1e6
}
