package register

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
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

// BenchmarkMapJob is ferry map's library path end to end, as the command
// runs it less the command line and the process start: read the transform
// file and a table of 100,000 cells (spread over the middle 220 µm of a
// 300 µm block, as testdata/bench/make_inputs.py writes them), hash the
// cells file, map them through a 300-landmark spline with the error model,
// write the table and its sidecar. The fit is made once, outside the
// timing. Profile it with -cpuprofile; docs/benchmarks.md has its figures.
func BenchmarkMapJob(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	p := synthetic(rng, 300, warpedTruth, transform.Vec{0.8, 0.8, 2.5})
	for i := range p.Source {
		for k := range 3 {
			p.Source[i][k] *= 300 / []float64{500, 500, 300}[k]
		}
	}
	s := Settings{Model: transform.TPS, Smoothing: Smoothing{Value: 10}}
	a, err := Assess(p, s)
	if err != nil {
		b.Fatal(err)
	}
	f := &Registration{Transform: a.Result.Transform, Landmarks: LandmarkSource{Path: "landmarks.csv", SHA256: "0"},
		Uncertainty: NewUncertaintyModel(p, a, s)}
	data, err := f.Marshal()
	if err != nil {
		b.Fatal(err)
	}
	dir := b.TempDir()
	tr := filepath.Join(dir, "transform.json")
	cells := filepath.Join(dir, "cells.csv")
	var csv []byte
	csv = append(csv, "id,x,y,z,osi\n"...)
	frac := func(x float64) float64 { return x - math.Floor(x) }
	for i := range 100_000 {
		x := float64(i)
		csv = fmt.Appendf(csv, "c%d,%.3f,%.3f,%.3f,%.2f\n", i+1, 40+220*frac(x*0.618034), 40+220*frac(x*0.414214), 40+220*frac(x*0.732051), frac(x*0.1))
	}
	if err := os.WriteFile(tr, data, 0o644); err != nil {
		b.Fatal(err)
	}
	if err := os.WriteFile(cells, csv, 0o644); err != nil {
		b.Fatal(err)
	}
	out := filepath.Join(dir, "mapped.csv")
	sd := transform.Vec{0.8, 0.8, 3}
	cpu0 := cpuSeconds()
	for b.Loop() {
		file, err := ReadRegistrationFile(tr)
		if err != nil {
			b.Fatal(err)
		}
		set, pos, err := ReadCells(cells, "cells", file, false)
		if err != nil {
			b.Fatal(err)
		}
		m, err := NewMapper(file)
		if err != nil {
			b.Fatal(err)
		}
		mapped, err := m.MapAllContext(context.Background(), pos, &sd, false)
		if err != nil {
			b.Fatal(err)
		}
		sum, err := FileSHA256(cells)
		if err != nil {
			b.Fatal(err)
		}
		prov := Provenance{Command: "map", Inputs: []Input{{Path: cells, SHA256: sum}}}
		if err := WriteMappedTable(context.Background(), out, prov, set, mapped, FrameTarget, nil); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric((cpuSeconds()-cpu0)/float64(b.N), "cpu_s/op")
}

// BenchmarkCheck400 is the check of 400 landmarks of a warped volume with
// the spline and its smoothing given (the check the scripted brute-force
// leave-one-out of testdata/bench/scripted.py is compared with): the exact
// leave-one-out, the error model, the flags and the calibration.
// docs/benchmarks.md has its figures and where its time goes.
func BenchmarkCheck400(b *testing.B) {
	rng := rand.New(rand.NewPCG(400, 3))
	p := synthetic(rng, 400, warpedTruth, transform.Vec{0.8, 0.8, 2.5})
	b.Run("loo-alone", func(b *testing.B) {
		// The spline's fit with its exact leave-one-out and nothing else:
		// what the brute-force refits compute.
		cpu0 := cpuSeconds()
		for b.Loop() {
			if _, err := transform.Fit(transform.TPS, 3, p.Source, p.Target, transform.Options{LeaveOneOut: true}); err != nil {
				b.Fatal(err)
			}
		}
		b.ReportMetric((cpuSeconds()-cpu0)/float64(b.N), "cpu_s/op")
	})
	for _, c := range []struct {
		name string
		s    Settings
	}{
		{"tps-s0", Settings{Model: transform.TPS, Smoothing: Smoothing{Value: 0}}},
		{"default", Settings{Smoothing: Smoothing{Auto: true}}},
	} {
		b.Run(c.name, func(b *testing.B) {
			cpu0 := cpuSeconds()
			for b.Loop() {
				if _, err := Assess(p, c.s); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric((cpuSeconds()-cpu0)/float64(b.N), "cpu_s/op")
		})
	}
}
