// The report's summaries in words and numbers: the check, the landmark
// kinds, the mapped cells, the matches and the calibration.

package report

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"ferry/internal/sample"
	"ferry/register"
	"ferry/register/match"
	"ferry/status"
	"ferry/transform"
)

func (d *pageData) summarise(in *Input) {
	ck := in.Check
	d.N, d.Dim = len(ck.Landmarks), ck.Dim
	d.DimWords = fmt.Sprintf("%d-D", ck.Dim)
	d.Excluded = strings.Join(in.Excluded, ", ")
	d.Model, d.Reason, d.Mirrored = ck.Model, ck.Reason, ck.Mirrored
	if ck.Model == string(transform.TPS) {
		d.Smoothing = fmt.Sprintf("%.4g", ck.Smoothing)
		// The transform is fitted to every landmark, flagged ones
		// included, and its smoothing chosen on them; the comparison was
		// made on the landmarks that passed. Say so where the two differ.
		for _, m := range ck.Models {
			if m.Model == ck.Model && m.Error == "" && math.Abs(m.Smoothing-ck.Smoothing) > 1e-9*math.Max(1, ck.Smoothing) && len(ck.Flagged) > 0 {
				d.SmoothingNote = fmt.Sprintf("S = %.4g in the transform, which is fitted to every landmark, the flagged ones included; S = %.4g fitted to the landmarks that passed, as in the comparison of models.",
					ck.Smoothing, m.Smoothing)
			}
		}
	}
	if in.TransformFile != "" {
		d.TransformFrom = in.TransformFile
	}
	d.RMS, d.Median, d.Max = um(ck.RMSUM), um(ck.MedianUM), um(ck.MaxUM)
	d.Flagged = len(ck.Flagged)
	d.ExcludeFlagged = strings.Join(append(append([]string(nil), in.Excluded...), ck.Flagged...), ",")
	c := ck.Calibration
	d.CalibrationShare = fmt.Sprintf("%d of %d landmarks (%s) have their leave-one-out error inside their predicted 95 %% radius",
		c.Inside, c.N, share(c.Inside, c.N))
	for _, st := range []string{string(status.OK), string(status.Extrapolated)} {
		if bc, found := ck.CalibrationByStatus[st]; found && bc.N > 0 {
			d.CalibrationShare += fmt.Sprintf("; %s (as map would call it, predicted from the others): %d of %d (%s)", st, bc.Inside, bc.N, share(bc.Inside, bc.N))
		}
	}
	for _, i := range byError(ck.Landmarks) {
		l := ck.Landmarks[i]
		comp := make([]string, len(l.LOOUM))
		for k, v := range l.LOOUM {
			comp[k] = fmt.Sprintf("%+.2f", v)
		}
		row := landmarkRow{
			ID: l.ID, Kind: l.Kind, Error: um(l.LOOErrorUM), R95: um(l.R95UM),
			Score: fmt.Sprintf("%.2f", l.Score), Flag: l.Flag, Components: strings.Join(comp, ", "),
			Outside: l.LOOErrorUM > l.R95UM,
		}
		d.Landmarks = append(d.Landmarks, row)
		if l.Flag != "" {
			d.FlaggedRows = append(d.FlaggedRows, row)
		}
	}
	for _, m := range ck.Models {
		r := modelRow{Model: m.Model, Chosen: m.Model == ck.Model}
		if m.Error != "" {
			r.Failed, r.Note = true, m.Error
			r.RMS, r.Median, r.Max = "—", "—", "—"
		} else {
			r.RMS, r.Median, r.Max = um(m.RMSUM), um(m.MedianUM), um(m.MaxUM)
			if m.Model == string(transform.TPS) {
				r.Smoothing = fmt.Sprintf("%.4g", m.Smoothing)
			}
			if m.Mirrored {
				r.Note = "mirrored"
			}
		}
		d.Models = append(d.Models, r)
	}
	d.Kinds = kindRows(ck.Landmarks)
}

// kindRows summarises the errors per kind of landmark, flagged ones left
// out of the numbers.
func kindRows(ls []register.LandmarkJSON) []kindRow {
	errs := map[string][]float64{}
	flagged := map[string]int{}
	for _, l := range ls {
		if _, ok := errs[l.Kind]; !ok {
			errs[l.Kind] = nil
		}
		if l.Flag != "" {
			flagged[l.Kind]++
			continue
		}
		errs[l.Kind] = append(errs[l.Kind], l.LOOErrorUM)
	}
	kinds := make([]string, 0, len(errs))
	for k := range errs {
		kinds = append(kinds, k)
	}
	sort.Strings(kinds)
	var rows []kindRow
	for _, k := range kinds {
		e := errs[k]
		r := kindRow{Kind: k, N: len(e), Flagged: flagged[k], RMS: "—", Median: "—", Max: "—"}
		if len(e) > 0 {
			ss, mx := 0.0, 0.0
			for _, x := range e {
				ss += x * x
				mx = math.Max(mx, x)
			}
			r.RMS, r.Median, r.Max = um(math.Sqrt(ss/float64(len(e)))), um(sample.Median(e)), um(mx)
		}
		rows = append(rows, r)
	}
	return rows
}

func summariseCells(cells []register.MappedCell, file string, res *mapResult) *cellSummary {
	s := &cellSummary{File: file, N: len(cells)}
	counts := map[status.Status]int{}
	var r95 []float64
	for _, c := range cells {
		counts[c.Status]++
		r95 = append(r95, c.R95)
	}
	seen := map[status.Status]bool{}
	for _, st := range status.Mapping() {
		seen[st] = true
		if counts[st] > 0 {
			s.Counts = append(s.Counts, statusCount{Status: string(st), N: counts[st], Share: share(counts[st], len(cells))})
		}
	}
	var others []string
	for st := range counts {
		if !seen[st] {
			others = append(others, string(st))
		}
	}
	sort.Strings(others)
	for _, st := range others {
		s.Counts = append(s.Counts, statusCount{Status: st, N: counts[status.Status(st)], Share: share(counts[status.Status(st)], len(cells))})
	}
	s.MedianR95, s.MaxR95 = um(sample.Median(r95)), um(maxOf(r95))
	if res != nil {
		s.Placed, s.NotPlaced = res.cellsPlaced, res.cellsMissing
	}
	return s
}

func (d *pageData) summariseMatches(ms []match.Row, file string) {
	s := &matchSummary{File: file, N: len(ms)}
	counts := map[status.Status]int{}
	var p, dist []float64
	for _, m := range ms {
		counts[m.Status]++
		if m.Status == status.Matched {
			p = append(p, m.PMatch)
			dist = append(dist, m.DistanceUM)
		}
		if m.Status == status.Ambiguous {
			row := matchRow{
				ID: m.ID, Candidate: m.Candidate, PMatch: probability(m.PMatch), Distance: um(m.DistanceUM),
				RunnerUp: m.RunnerUp, PRunnerUp: probability(m.PRunnerUp), PNone: probability(m.PNone),
			}
			if m.RunnerUp == "" && !math.IsNaN(m.PNone) {
				// The other choice is that the cell has no counterpart.
				row.NoCounterpart, row.PRunnerUp = true, probability(m.PNone)
			}
			s.Ambiguous = append(s.Ambiguous, row)
		}
	}
	for _, st := range status.Matching() {
		s.Counts = append(s.Counts, statusCount{Status: string(st), N: counts[st], Share: share(counts[st], len(ms))})
	}
	s.MedianP, s.MedianDist = probability(sample.Median(p)), um(sample.Median(dist))
	d.Matches = s
}

func probability(p float64) string {
	if math.IsNaN(p) || math.IsInf(p, 0) {
		return "—"
	}
	return fmt.Sprintf("%.3f", p)
}

// calibrationText says in words how the curve lies.
func (d *pageData) calibrationText() {
	cv := d.coverage
	if cv.n == 0 {
		d.CalibrationText = "No landmark passed the check, so there is nothing to calibrate."
		return
	}
	outside := 0
	for k := range cv.expected {
		if cv.observed[k] < cv.low[k] || cv.observed[k] > cv.high[k] {
			outside++
		}
	}
	switch {
	case outside == 0:
		d.CalibrationText = fmt.Sprintf("At every level the observed share lies within the range expected of %d well-predicted landmarks: the predicted errors are consistent with the observed ones.", cv.n)
	default:
		below := 0
		for k := range cv.expected {
			if cv.observed[k] < cv.low[k] {
				below++
			}
		}
		what := "above it: the predicted radii are wider than the errors call for (conservative)"
		if below*2 >= outside {
			what = "below it: errors are larger than predicted, so r95 understates the uncertainty"
		}
		d.CalibrationText = fmt.Sprintf("At %d of %d levels the observed share leaves the range expected of %d well-predicted landmarks, mostly %s.", outside, len(cv.expected), cv.n, what)
	}
}

// ordinal writes 2 as "2nd", 3 as "3rd", 11 as "11th".
func ordinal(k int) string {
	suffix := "th"
	if k%100 < 11 || k%100 > 13 {
		switch k % 10 {
		case 1:
			suffix = "st"
		case 2:
			suffix = "nd"
		case 3:
			suffix = "rd"
		}
	}
	return fmt.Sprintf("%d%s", k, suffix)
}
