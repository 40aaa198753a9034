package refine

import (
	"syscall"
	"testing"

	"ferry/transform"
)

// largeParams is the large block of the issue: 1 × 1 × 0.4 mm imaged, 60
// vessel landmarks, the EM export reaching 500 µm beyond it in x and y and
// 200 µm in z (about 288,000 nuclei), in vivo z sd 2 µm.
func largeParams(cells int) scenarioParams {
	pr := defaultParams(warpBumps, 60, 2)
	pr.Size = transform.Vec{1000, 1000, 400}
	pr.Cells = cells
	pr.Margin = transform.Vec{500, 500, 200}
	return pr
}

// BenchmarkRefineLarge refines and matches 5,000 cells against about
// 288,000 nuclei: what `ferry refine` then `ferry match` compute, the
// reading and writing of files aside.
func BenchmarkRefineLarge(b *testing.B) { benchLarge(b, 5000) }

// BenchmarkRefineLarge20k is the same with 20,000 cells.
func BenchmarkRefineLarge20k(b *testing.B) { benchLarge(b, 20000) }

func benchLarge(b *testing.B, cells int) {
	s := newScenario(largeParams(cells), 1)
	var after scores
	// CPU seconds as well as wall time: on a shared machine the wall time
	// says more about the others than about this.
	cpu0 := cpuSeconds()
	for b.Loop() {
		_, after, _ = refineAndScore(b, s, false)
	}
	b.ReportMetric((cpuSeconds()-cpu0)/float64(b.N), "cpu_s/op")
	b.ReportMetric(float64(len(s.Candidates)), "candidates")
	b.ReportMetric(after.Recall, "recall")
	b.ReportMetric(after.Precision, "precision")
	b.ReportMetric(after.MedianUM, "median_um")
	b.ReportMetric(after.Coverage, "coverage")
}

// cpuSeconds is the CPU time (user and system) this process has used.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return float64(ru.Utime.Sec+ru.Stime.Sec) + float64(ru.Utime.Usec+ru.Stime.Usec)/1e6
}
