package main

import (
	"os"
	"path/filepath"
	"runtime"
	"sync"
	"testing"
	"time"
)

// peakHeap samples the live heap every few milliseconds until stopped, and
// keeps the largest figure. ReadMemStats stops the world for a few
// microseconds, which a 10 ms period makes negligible.
type peakHeap struct {
	stop chan struct{}
	done sync.WaitGroup
	peak uint64
}

func startPeakHeap() *peakHeap {
	runtime.GC()
	p := &peakHeap{stop: make(chan struct{})}
	p.done.Add(1)
	go func() {
		defer p.done.Done()
		tick := time.NewTicker(10 * time.Millisecond)
		defer tick.Stop()
		var m runtime.MemStats
		for {
			runtime.ReadMemStats(&m)
			p.peak = max(p.peak, m.HeapAlloc)
			select {
			case <-p.stop:
				return
			case <-tick.C:
			}
		}
	}()
	return p
}

// Stop ends the sampling and returns the peak in megabytes (2^20 bytes).
func (p *peakHeap) Stop() float64 {
	close(p.stop)
	p.done.Wait()
	return float64(p.peak) / (1 << 20)
}

// BenchmarkMapMillionCells maps a million-row cells file through a
// thin-plate spline fitted to 100 landmarks, end to end as ferry map does:
// read, map with uncertainty, write. It reports the peak live heap.
//
//	go test ./cmd/ferry -run '^$' -bench MapMillionCells -benchtime 1x
func BenchmarkMapMillionCells(b *testing.B) {
	dir := b.TempDir()
	landmarks := writeFile(b, filepath.Join(dir, "landmarks.csv"), landmarkCSV(100))
	tr := filepath.Join(dir, "transform.json")
	mustSucceed(b, "fit", landmarks, "--model", "tps", "-o", tr)
	cells := writeFile(b, filepath.Join(dir, "cells.csv"), cellsCSV(1_000_000))
	if info, err := os.Stat(cells); err == nil {
		b.Logf("cells file: %.0f MB", float64(info.Size())/(1<<20))
	}
	out := filepath.Join(dir, "mapped.csv")
	b.ResetTimer()
	peak := 0.0
	for range b.N {
		p := startPeakHeap()
		o := ferry(b, "map", tr, cells, "-o", out)
		peak = max(peak, p.Stop())
		if o.code != exitOK {
			b.Fatal(o)
		}
	}
	b.ReportMetric(peak, "peak-MB")
}

// BenchmarkMapCommand is the whole map command as a user runs it — read the
// transform file and 100,000 cells, map them through a 300-landmark spline
// with their uncertainty, write the table — less only the process start.
func BenchmarkMapCommand(b *testing.B) {
	dir := b.TempDir()
	landmarks := writeFile(b, filepath.Join(dir, "landmarks.csv"), landmarkCSV(300))
	tr := filepath.Join(dir, "transform.json")
	mustSucceed(b, "fit", landmarks, "--model", "tps", "--smoothing", "10", "-o", tr)
	cells := writeFile(b, filepath.Join(dir, "cells.csv"), cellsCSV(100_000))
	out := filepath.Join(dir, "mapped.csv")
	b.ResetTimer()
	for range b.N {
		if o := ferry(b, "map", tr, cells, "--cell-sd", "0.8,0.8,3", "-o", out); o.code != exitOK {
			b.Fatal(o)
		}
	}
}
