package register

import (
	"context"
	"fmt"
	"strconv"
	"strings"

	"ferry/landmarks"
	"ferry/progress"
	"ferry/transform"
)

// Problem is a landmark set ready to be fitted: positions in micrometres,
// the excluded pairs already removed.
type Problem struct {
	Dim            int
	IDs            []string
	Kinds          []landmarks.Kind
	Source, Target []transform.Vec
	// Lines are the pairs' lines in the landmark file, for messages; may
	// be nil.
	Lines []int
	// From names the landmark file the pairs were read from and the ids
	// left out of it; Voxels are the voxel sizes its coordinates were
	// scaled by. A registration fitted to the problem records both.
	From   LandmarkSource
	Voxels Voxels
}

// NewProblem takes the pairs of a landmark file, already scaled to
// micrometres and with the user's exclusions removed.
func NewProblem(set *landmarks.PairSet) *Problem {
	return &Problem{
		Dim:    set.Dim,
		IDs:    set.IDs(),
		Kinds:  set.Kinds(),
		Source: set.Sources(),
		Target: set.Targets(),
		Lines:  pairLines(set),
		From:   LandmarkSource{Path: set.Path, SHA256: set.SHA256},
	}
}

func pairLines(set *landmarks.PairSet) []int {
	lines := make([]int, len(set.Pairs))
	for i, pr := range set.Pairs {
		lines[i] = pr.Line
	}
	return lines
}

// Len is the number of landmark pairs.
func (p *Problem) Len() int { return len(p.IDs) }

// subset is the problem restricted to the pairs whose index keep reports.
func (p *Problem) subset(keep func(i int) bool) *Problem {
	q := &Problem{Dim: p.Dim}
	for i := range p.IDs {
		if keep(i) {
			q.IDs = append(q.IDs, p.IDs[i])
			q.Kinds = append(q.Kinds, p.Kinds[i])
			q.Source = append(q.Source, p.Source[i])
			q.Target = append(q.Target, p.Target[i])
			if i < len(p.Lines) {
				q.Lines = append(q.Lines, p.Lines[i])
			}
		}
	}
	return q
}

// Smoothing is the thin-plate-spline smoothing: a number, or Auto.
type Smoothing struct {
	Auto  bool
	Value float64
}

// ParseSmoothing reads a smoothing as the command line gives it: "auto" or
// a number ≥ 0. The error speaks of the value; the caller names where it
// came from.
func ParseSmoothing(s string) (Smoothing, error) {
	if strings.EqualFold(strings.TrimSpace(s), "auto") {
		return Smoothing{Auto: true}, nil
	}
	v, err := landmarks.ParseDecimal(s)
	if err != nil {
		return Smoothing{}, fmt.Errorf("want \"auto\" or a number ≥ 0, got %q", s)
	}
	if v < 0 {
		return Smoothing{}, fmt.Errorf("%g is negative: want \"auto\" or a number ≥ 0", v)
	}
	return Smoothing{Value: v}, nil
}

// String is the smoothing as ParseSmoothing reads it back: "auto" or the
// number.
func (s Smoothing) String() string {
	if s.Auto {
		return "auto"
	}
	return strconv.FormatFloat(s.Value, 'g', -1, 64)
}

// ParseModel reads a model name as the command line gives it: "auto" (the
// empty Kind) or a model.
func ParseModel(s string) (transform.Kind, error) {
	if strings.EqualFold(strings.TrimSpace(s), "auto") {
		return "", nil
	}
	k, err := transform.ParseKind(strings.ToLower(strings.TrimSpace(s)))
	if err != nil {
		// The command line also takes auto, which transform does not know.
		return "", fmt.Errorf("unknown model %q (want auto, translation, rigid, similarity, affine or tps)", s)
	}
	return k, nil
}

// Settings steer the assessment of a landmark set. Its zero value fits the
// model chosen automatically with smoothing 0; most callers want
// Smoothing{Auto: true}, as the command line's default.
type Settings struct {
	// Model is the model asked for; empty means auto.
	Model     transform.Kind
	Smoothing Smoothing
	NoMirror  bool
	// SourceSD and TargetSD, when set, are the localisation standard
	// deviations per axis (µm) of the landmark picks on each side.
	SourceSD, TargetSD *transform.Vec
	// Progress, when not nil, hears of every fit Assess makes: with many
	// landmarks the leave-one-out check takes seconds.
	Progress progress.Reporter

	// ctx, when set by AssessContext, is checked between fits.
	ctx context.Context
	// fits, when set by AssessContext or CheckAndFit, keeps the check's
	// fits for the steps that ask for the same one again (fitcache.go).
	fits *fitCache
}

// cancelled returns the context's error, if any.
func (s Settings) cancelled() error {
	if s.ctx == nil {
		return nil
	}
	return s.ctx.Err()
}
