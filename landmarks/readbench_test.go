package landmarks

import (
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"syscall"
	"testing"
)

// cpuSeconds is the CPU time (user and system) the process has used; on a
// shared machine it varies less than the wall time the benchmark reports.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return float64(ru.Utime.Sec+ru.Stime.Sec) + float64(ru.Utime.Usec+ru.Stime.Usec)/1e6
}

// candidatesTable writes a candidates table of n rows, as a segmentation of
// nuclei might export it: id, position and a volume.
func candidatesTable(n int) []byte {
	rng := rand.New(rand.NewPCG(5, 6))
	b := []byte("id,x,y,z,volume_um3\n")
	for i := range n {
		b = fmt.Appendf(b, "n%d,%.4f,%.4f,%.4f,%.1f\n", i,
			1000*rng.Float64(), 1000*rng.Float64(), 400*rng.Float64(), 100+300*rng.Float64())
	}
	return b
}

// benchmarkReadPoints reads the table data from a file, as the commands do,
// and reports the speed in bytes of file per second.
func benchmarkReadPoints(b *testing.B, what string, data []byte, rows int) {
	path := benchTableFile(b, what, data)
	cpu0 := cpuSeconds()
	for b.Loop() {
		set, err := ReadPoints(path, what)
		if err != nil {
			b.Fatal(err)
		}
		if len(set.Points) != rows {
			b.Fatalf("%d points, want %d", len(set.Points), rows)
		}
	}
	b.ReportMetric((cpuSeconds()-cpu0)/float64(b.N), "cpu_s/op")
}

// BenchmarkReadCells reads a 100,000-row cells table (six columns, two of
// them extra) from a file.
func BenchmarkReadCells(b *testing.B) {
	const rows = 100_000
	benchmarkReadPoints(b, "cells", cellsTable(rows), rows)
}

// BenchmarkReadCandidates reads a 300,000-row candidates table (five
// columns, one of them extra) from a file.
func BenchmarkReadCandidates(b *testing.B) {
	const rows = 300_000
	benchmarkReadPoints(b, "candidates", candidatesTable(rows), rows)
}

// BenchmarkReadTable reads the 100,000-row cells table as a generic Table
// and parses its numbers, as the readers of ferry's own outputs do.
func BenchmarkReadTable(b *testing.B) {
	const rows = 100_000
	data := cellsTable(rows)
	path := benchTableFile(b, "cells", data)
	cpu0 := cpuSeconds()
	for b.Loop() {
		tb, err := ReadTable(path)
		if err != nil {
			b.Fatal(err)
		}
		if tb.Len() != rows {
			b.Fatalf("%d rows, want %d", tb.Len(), rows)
		}
		for r := range tb.Len() {
			for c := 1; c < 6; c++ {
				if _, _, err := tb.Number(r, c); err != nil {
					b.Fatal(err)
				}
			}
		}
	}
	b.ReportMetric((cpuSeconds()-cpu0)/float64(b.N), "cpu_s/op")
}

// benchTableFile writes data into the benchmark's temporary folder as
// what.csv and sets the benchmark up to report bytes of file per second and
// allocations.
func benchTableFile(b *testing.B, what string, data []byte) string {
	path := filepath.Join(b.TempDir(), what+".csv")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		b.Fatal(err)
	}
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	return path
}
