package register

import (
	"bufio"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"
	"time"

	"ferry/internal/errkind"
	"ferry/internal/remedy"
	"ferry/transform"
)

// The size of the dense systems a thin-plate spline builds, and how long
// they take, measured with /usr/bin/time on `ferry check` of n random 3-D
// landmarks (docs/robustness.md, "Size limits"): peak resident memory 61 MB
// at n = 1000 and 194 MB at n = 2000, with --model tps --smoothing 0, about
// 25 MB of it the program itself; that is 5.3 n×n float64 matrices at
// n = 2000 (the kernel, its factor, the leave-one-out inverse, copies for the
// refits, and the garbage collector's slack). denseMatrices rounds it up.
const (
	denseMatrices = 6
	// secondsPerCube is the time of one check with the smoothing given, per
	// n³: 0.77 s at n = 1000 and 4.7 s at n = 2000 on the 2-core machine of
	// docs/benchmarks.md, busy with other builds. A faster machine takes
	// less; the estimate is said to be this machine's pace.
	secondsPerCube = 6e-10
	// autoSmoothingFits is how many times longer the check takes with
	// --smoothing auto: the search factorises the spline's projected block
	// at 17 smoothings at every step, two at a time, sharing the kernel
	// matrix (transform.SmoothingPath): 4.0 s of CPU for a clean set of
	// 1 000 landmarks and 25 s for 2 000, against 0.77 s and 4.7 s with the
	// smoothing given (docs/benchmarks.md). It was 16 when every smoothing
	// was a fit of its own.
	autoSmoothingFits = 5
	// autoSmoothingMatrices is how many more n×n matrices the smoothing
	// search holds: the projected kernel it keeps, the kernel matrix while
	// it is projected, and three for each smoothing evaluated at once, with
	// the collector's slack one more each. Peak resident memory of
	// `ferry check` of 2 000 landmarks with auto smoothing: 530 MB, 16.5
	// matrices of 2 004² float64.
	autoSmoothingMatrices = 2 + 4*transform.SmoothingPathWorkers
	// announceAfter is the estimated time from which a command says, before
	// starting, how long the job will take.
	announceAfter = 10 * time.Second
)

// JobEstimate is what the largest dense system of a check or fit costs.
type JobEstimate struct {
	// Landmarks is the number of pairs the spline is fitted to; zero when
	// no dense system is built (the linear models need memory in
	// proportion to the landmarks only).
	Landmarks int
	// Bytes is the peak memory, Duration the time on the measured machine.
	Bytes    float64
	Duration time.Duration
	// AutoSmoothing is true when the time includes the smoothing search.
	AutoSmoothing bool
	// Mapping is true for the estimate of mapping through a fitted spline
	// (EstimateMapping), false for a check or fit.
	Mapping bool
}

// mappingMatrices is how many n×n float64 matrices mapping through a
// spline holds: it rebuilds and factorises the spline's system for the
// cells' uncertainty. Peak resident memory of `ferry map` of 1 000 cells
// through splines of 1 000 and 2 000 landmarks was 70 MB and 85 MB, about
// 1.4 matrices at n = 2 000 above the program's own; 3 leaves room.
const mappingMatrices = 3

// EstimateMapping estimates the memory and time of preparing to map
// through the transform of r (NewMapper): a spline's system is rebuilt and
// factorised, n³/3 flops and a few n×n matrices; a linear map costs
// nothing to speak of.
func EstimateMapping(r *Registration) JobEstimate {
	nodes := 0
	var walk func(t transform.Transform)
	walk = func(t transform.Transform) {
		switch t := t.(type) {
		case *transform.Spline:
			nodes = max(nodes, len(t.Nodes))
		case *transform.Chain:
			for _, s := range t.Steps {
				walk(s)
			}
		}
	}
	walk(r.Transform)
	if nodes == 0 {
		return JobEstimate{}
	}
	n := float64(nodes + 4)
	return JobEstimate{
		Landmarks: nodes,
		Bytes:     mappingMatrices * n * n * 8,
		Duration:  time.Duration(math.Min(secondsPerCube*n*n*n, 1e9) * float64(time.Second)),
		Mapping:   true,
	}
}

// EstimateJob estimates the memory and time of Assess on p with s. Only the
// thin-plate spline builds an n×n system; auto (s.Model empty) fits the
// spline when the set supports it.
func EstimateJob(p *Problem, s Settings) JobEstimate {
	model := s.Model
	if model == "" && p.Len() > transform.MinPairs(transform.TPS, p.Dim)+3*(p.Dim+1) {
		model = transform.TPS
	}
	if model != transform.TPS {
		return JobEstimate{}
	}
	n := float64(p.Len() + p.Dim + 1)
	secs := secondsPerCube * n * n * n
	matrices := float64(denseMatrices)
	if s.Smoothing.Auto {
		secs *= autoSmoothingFits
		matrices += autoSmoothingMatrices
	}
	return JobEstimate{
		Landmarks:     p.Len(),
		Bytes:         matrices * n * n * 8,
		Duration:      time.Duration(math.Min(secs, 1e9) * float64(time.Second)),
		AutoSmoothing: s.Smoothing.Auto,
	}
}

// Announce reports whether the job is long enough to say so before it
// starts.
func (e JobEstimate) Announce() bool { return e.Duration >= announceAfter }

// String says what the job costs, in one line, in the library's words
// (Describe names the inputs for a caller).
func (e JobEstimate) String() string { return e.Describe().String() }

// Describe says what the job costs, in one line, as a message whose inputs
// (the smoothing) a caller may name.
func (e JobEstimate) Describe() remedy.Message {
	var how any = "with the smoothing given"
	if e.AutoSmoothing {
		how = remedy.Sprintf("with %v", autoSmoothingRef)
	}
	if e.Mapping {
		how = "to map through"
	}
	return remedy.Sprintf("a thin-plate spline on %d landmarks needs about %s of memory and takes about %s on a 2-core machine %v",
		e.Landmarks, FormatBytes(e.Bytes), FormatDuration(e.Duration), how)
}

// The inputs the way out of a large job asks to change.
var (
	autoSmoothingRef = remedy.Ref{Input: remedy.Smoothing, Words: "the smoothing chosen by cross-validation", Form: "auto"}
	zeroSmoothingRef = remedy.Ref{Input: remedy.Smoothing, Words: "0, interpolation", Form: "0"}
	affineModelRef   = remedy.Ref{Input: remedy.Model, Words: "affine", Form: "affine"}
)

// WayOut says what makes the job shorter and smaller.
func (e JobEstimate) WayOut() remedy.Message {
	if e.AutoSmoothing {
		return remedy.Sprintf("give the smoothing (%v, or a value from a check of a subset), %v", zeroSmoothingRef, e.smaller())
	}
	return e.smaller()
}

// smaller says what makes the job need less memory; the smoothing does
// not.
func (e JobEstimate) smaller() remedy.Message {
	if e.Mapping {
		return remedy.Sprintf("refit on fewer landmarks or with a linear model (%v) on a machine that can, or map on a machine with more memory", affineModelRef)
	}
	return remedy.Sprintf("use a linear model (%v), which needs memory only in proportion to the landmarks, or fewer landmarks", affineModelRef)
}

// CheckMemory refuses the job when it needs more memory than available
// (bytes; zero means unknown, and nothing is refused).
func (e JobEstimate) CheckMemory(available uint64) error {
	if available == 0 || e.Bytes <= float64(available) {
		return nil
	}
	return errkind.New(ErrTooLarge, "%w", remedy.Errorf("%v, and this machine has %s available (/proc/meminfo): refused before starting; %v",
		e.Describe(), FormatBytes(float64(available)), e.smaller()))
}

// AvailableMemory is the memory the machine can give a new job, from the
// MemAvailable line of /proc/meminfo (MemTotal when the kernel is too old to
// have it); zero when it cannot be told.
func AvailableMemory() uint64 {
	f, err := os.Open("/proc/meminfo")
	if err != nil {
		return 0
	}
	defer f.Close()
	return parseMeminfo(bufio.NewScanner(f))
}

func parseMeminfo(sc *bufio.Scanner) uint64 {
	var total, avail uint64
	for sc.Scan() {
		fields := strings.Fields(sc.Text())
		if len(fields) < 2 {
			continue
		}
		v, err := strconv.ParseUint(fields[1], 10, 64)
		if err != nil {
			continue
		}
		if len(fields) == 3 && fields[2] == "kB" {
			v *= 1024
		}
		switch fields[0] {
		case "MemAvailable:":
			avail = v
		case "MemTotal:":
			total = v
		}
	}
	if avail > 0 {
		return avail
	}
	return total
}

// FormatBytes writes a size in B, kB, MB, GB or TB (powers of 1000).
func FormatBytes(b float64) string {
	units := []string{"B", "kB", "MB", "GB", "TB", "PB"}
	i := 0
	for b >= 1000 && i < len(units)-1 {
		b /= 1000
		i++
	}
	if b < 10 && i > 0 {
		return fmt.Sprintf("%.1f %s", b, units[i])
	}
	return fmt.Sprintf("%.0f %s", b, units[i])
}

// FormatDuration writes a duration in words a user reads at a glance.
func FormatDuration(d time.Duration) string {
	switch {
	case d < time.Minute:
		return fmt.Sprintf("%.0f s", math.Max(1, d.Seconds()))
	case d < time.Hour:
		return fmt.Sprintf("%.0f minutes", d.Minutes())
	case d < 48*time.Hour:
		return fmt.Sprintf("%.1f hours", d.Hours())
	default:
		return fmt.Sprintf("%.0f days", d.Hours()/24)
	}
}
