package register

import (
	"bufio"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
	"time"

	"ferry/internal/remedy"
	"ferry/transform"
)

func TestParseMeminfo(t *testing.T) {
	for _, tc := range []struct {
		text string
		want uint64
	}{
		{"MemTotal:       24683548 kB\nMemFree:  1 kB\nMemAvailable:   24163684 kB\n", 24163684 * 1024},
		{"MemTotal:       2048 kB\n", 2048 * 1024},
		{"nonsense\n", 0},
	} {
		if got := parseMeminfo(bufio.NewScanner(strings.NewReader(tc.text))); got != tc.want {
			t.Errorf("parseMeminfo(%q) = %d, want %d", tc.text, got, tc.want)
		}
	}
}

// TestEstimateJob: only a spline builds a dense system; its memory grows as
// n², its time as n³ and 5 times more with the smoothing search, which
// holds 10 more n×n matrices (two smoothings at a time); a job
// beyond the memory available is refused with the estimate and the way out.
func TestEstimateJob(t *testing.T) {
	problem := func(n int) *Problem { return &Problem{Dim: 3, IDs: make([]string, n)} }
	auto := Settings{Smoothing: Smoothing{Auto: true}}
	if e := EstimateJob(problem(100000), Settings{Model: transform.Affine}); e.Landmarks != 0 || e.CheckMemory(1) != nil {
		t.Errorf("affine: %+v", e)
	}
	if e := EstimateJob(problem(10), auto); e.Landmarks != 0 {
		t.Errorf("too few landmarks for auto to take the spline: %+v", e)
	}
	big := EstimateJob(problem(100000), auto)
	if big.Bytes < 1.2e12 || big.Bytes > 1.4e12 {
		t.Errorf("100 000 landmarks: %g bytes, want about (6 + 10) × 8 × 1e10", big.Bytes)
	}
	fixed := EstimateJob(problem(100000), Settings{Model: transform.TPS})
	if fixed.Bytes < 4e11 || fixed.Bytes > 6e11 {
		t.Errorf("100 000 landmarks, smoothing given: %g bytes, want about 6 × 8 × 1e10", fixed.Bytes)
	}
	if r := float64(big.Duration) / float64(fixed.Duration); r < 4.5 || r > 5.5 {
		t.Errorf("auto smoothing takes %g times as long, want 5", r)
	}
	if r := EstimateJob(problem(2000), auto).Bytes / EstimateJob(problem(1000), auto).Bytes; r < 3.9 || r > 4.1 {
		t.Errorf("memory ratio for twice the landmarks %g, want 4", r)
	}
	err := big.CheckMemory(16e9)
	if err == nil {
		t.Fatal("a job of 1.3 TB on 16 GB was not refused")
	}
	for _, want := range []string{"100000 landmarks", "TB of memory", "16 GB available", "a linear model (affine)", "the smoothing chosen by cross-validation"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("refusal %q does not say %q", err, want)
		}
	}
	if strings.Contains(err.Error(), "--") {
		t.Errorf("the library's refusal %q names a command-line flag", err)
	}
	// A caller that takes the inputs under its own names gets them so.
	named := remedy.Named(err, func(in remedy.Input) string {
		return map[remedy.Input]string{remedy.Model: "--model", remedy.Smoothing: "--smoothing"}[in]
	})
	for _, want := range []string{"with --smoothing auto", "a linear model (--model affine)"} {
		if !strings.Contains(named, want) {
			t.Errorf("named refusal %q does not say %q", named, want)
		}
	}
	if way := big.WayOut().String(); !strings.Contains(way, "give the smoothing (0, interpolation, or a value") {
		t.Errorf("way out %q", way)
	}
	if err := big.CheckMemory(0); err != nil {
		t.Errorf("unknown memory refused: %v", err)
	}
	if !big.Announce() || EstimateJob(problem(100), auto).Announce() {
		t.Error("Announce: want a long job announced and a short one not")
	}
}

// TestEstimateMapping: a spline of 100 000 nodes, as a transform file of
// 64 MiB may hold, is refused for map on a machine of 16 GB; a linear
// transform costs nothing.
func TestEstimateMapping(t *testing.T) {
	sp := &transform.Spline{Dimension: 3, Nodes: make([]transform.Vec, 100000)}
	e := EstimateMapping(&Registration{Transform: sp})
	err := e.CheckMemory(16e9)
	if err == nil || !strings.Contains(err.Error(), "to map through") || !strings.Contains(err.Error(), "refit") {
		t.Errorf("refusal: %v", err)
	}
	lin := &transform.Linear{Model: transform.Affine, D: 3, A: transform.Identity()}
	if e := EstimateMapping(&Registration{Transform: lin}); e.Landmarks != 0 || e.CheckMemory(1) != nil {
		t.Errorf("linear: %+v", e)
	}
}

// BenchmarkAssessSpline measures the check of a spline with the smoothing
// given, the basis of EstimateJob's secondsPerCube; with -benchmem, the
// bytes allocated. Run:
//
//	go test ./register -run '^$' -bench AssessSpline -benchtime 1x -benchmem
func BenchmarkAssessSpline(b *testing.B) {
	for _, n := range []int{500, 1000, 2000} {
		rng := rand.New(rand.NewPCG(uint64(n), 1))
		p := &Problem{Dim: 3}
		for i := range n {
			x := transform.Vec{rng.Float64() * 500, rng.Float64() * 500, rng.Float64() * 500}
			p.IDs = append(p.IDs, "L"+strconv.Itoa(i))
			p.Kinds = append(p.Kinds, "vessel")
			p.Source = append(p.Source, x)
			p.Target = append(p.Target, transform.Vec{1.02*x[0] + rng.NormFloat64()*0.5, 0.98*x[1] + rng.NormFloat64()*0.5, 0.9*x[2] + rng.NormFloat64()*0.5})
		}
		s := Settings{Model: transform.TPS}
		b.Run(strconv.Itoa(n), func(b *testing.B) {
			for range b.N {
				if _, err := Assess(p, s); err != nil {
					b.Fatal(err)
				}
			}
			est := EstimateJob(p, s)
			b.ReportMetric(float64(est.Duration)/float64(time.Second), "estimated-s")
		})
	}
}
