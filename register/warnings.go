package register

import (
	"context"
	"fmt"
	"math"
	"strings"

	"ferry/internal/sample"
	"ferry/landmarks"
	"ferry/register/internal/hull"
	"ferry/status"
	"ferry/transform"
)

// SomaDiameterUM is the diameter of a cortical neuron's cell body, the
// size below which a registration must place cells to tell neighbours
// apart: mouse cortical somata are about 10 to 15 µm across (a textbook
// value, recalled from memory; the smaller end is taken). A registration
// whose median leave-one-out error exceeds it cannot resolve cells.
const SomaDiameterUM = 10.0

// MedianLOO is the median leave-one-out error (µm) of the landmarks that
// passed the check.
func (a *Assessment) MedianLOO() float64 {
	var e []float64
	for _, l := range a.Landmarks {
		if l.Flag == "" {
			e = append(e, l.LOOError)
		}
	}
	return sample.Median(e)
}

// Unresolved says in one line why the registration cannot resolve cells at
// all, or returns "": the median leave-one-out error above maxError (µm),
// or above SomaDiameterUM when maxError is 0.
func (a *Assessment) Unresolved(maxError float64) string {
	limit, what := SomaDiameterUM, "a soma's diameter"
	if maxError > 0 {
		limit, what = maxError, "the limit given"
	}
	if m := a.MedianLOO(); !(m <= limit) {
		return fmt.Sprintf("The registration cannot resolve cells: its median leave-one-out error, %.1f µm, exceeds %s (%.0f µm); add or correct landmarks before mapping.", m, what, limit)
	}
	return ""
}

// standingWarnings are the warnings about a fit that every command reading
// its transform file repeats.
func (a *Assessment) standingWarnings() []string {
	var w []string
	if ids := a.Flagged(); len(ids) > 0 {
		w = append(w, fmt.Sprintf("%d landmark(s) look wrong and are in this fit: %s", len(ids), strings.Join(ids, ", ")))
	}
	if u := a.Unresolved(0); u != "" {
		w = append(w, u)
	}
	return w
}

// FitJob is a landmark set checked and fitted as `ferry fit` does it.
type FitJob struct {
	Problem    *Problem
	Assessment *Assessment
	// Exclude are the ids left out: the user's and, unless kept, the
	// flagged ones.
	Exclude []string
	// LeftOut are the verdicts on the landmarks the check flagged and the
	// fit left out.
	LeftOut []LandmarkCheck
}

// CheckAndFit runs the check on the set with the user's exclusions and,
// unless keepFlagged, runs it again without the landmarks it flagged, so
// that the fit is of the landmarks that passed. A flagged landmark kept in
// stays a standing warning of the transform.
func CheckAndFit(ctx context.Context, set *landmarks.PairSet, exclude []string, vox Voxels, s Settings, keepFlagged bool) (*FitJob, error) {
	p, err := PrepareLandmarks(set, exclude, vox)
	if err != nil {
		return nil, err
	}
	// The second check starts from the first one's clean set: the fits
	// they share are made once.
	s.fits = newFitCache()
	a, err := AssessContext(ctx, p, s)
	if err != nil {
		return nil, err
	}
	job := &FitJob{Problem: p, Assessment: a, Exclude: exclude}
	flagged := a.Flagged()
	if keepFlagged || len(flagged) == 0 {
		return job, nil
	}
	for _, l := range a.Landmarks {
		if l.Flag != "" {
			job.LeftOut = append(job.LeftOut, l)
		}
	}
	job.Exclude = append(append([]string(nil), exclude...), flagged...)
	if job.Problem, err = PrepareLandmarks(set, job.Exclude, vox); err != nil {
		return nil, err
	}
	if job.Assessment, err = AssessContext(ctx, job.Problem, s); err != nil {
		return nil, fmt.Errorf("without the flagged landmarks %s: %w", strings.Join(flagged, ", "), err)
	}
	return job, nil
}

// Warnings are the standing warnings of the transform file the mapper was
// built from.
func (m *Mapper) Warnings() []string { return m.u.Warnings }

// looStatus is the map status each landmark would have when predicted from
// the others: status.Extrapolated when it lies outside their hull (the
// support planes of package hull), status.OK otherwise. It lets the check's
// calibration be split as map's cells are.
func looStatus(src []transform.Vec, dim int) []string {
	out := make([]string, len(src))
	for i := range out {
		out[i] = string(status.OK)
	}
	if len(src) < dim+2 {
		return out
	}
	h := hull.NewPlanes(src, dim, 0)
	tol := h.Tolerance()
	for _, d := range h.Dirs {
		// The largest and second largest reach along d, and who holds the
		// largest.
		top, second, who := math.Inf(-1), math.Inf(-1), -1
		for j, x := range src {
			v := d.Dot(x)
			switch {
			case v > top:
				top, second, who = v, top, j
			case v > second:
				second = v
			}
		}
		if who >= 0 && top > second+tol {
			out[who] = string(status.Extrapolated)
		}
	}
	return out
}
