package register

import (
	"fmt"
	"sort"

	"ferry/internal/sample"
	"ferry/transform"
)

// repeatedSource refuses two landmarks at one source position (within
// coincidentUM along every axis) for a thin-plate spline, naming both by id
// and line: an interpolating spline cannot send one point to two targets,
// and the search for the smoothing starts from interpolation. Before, the
// fit gave up naming the pairs by their 0-based index in the set.
func repeatedSource(p *Problem) error {
	order := make([]int, p.Len())
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return p.Source[order[a]][0] < p.Source[order[b]][0] })
	for a, i := range order {
		for _, j := range order[a+1:] {
			if p.Source[j][0]-p.Source[i][0] > coincidentUM {
				break
			}
			if !within(p.Source[i], p.Source[j], p.Dim, coincidentUM) {
				continue
			}
			first, second := min(i, j), max(i, j)
			apart := p.Target[first].Sub(p.Target[second]).Norm()
			what := fmt.Sprintf("with targets %.3g µm apart: a thin-plate spline cannot send one point to two targets", apart)
			if within(p.Target[first], p.Target[second], p.Dim, coincidentUM) {
				what = "and the same target: the pair is given twice"
			}
			return &PairError{ID: p.IDs[second], Affine: true, Msg: fmt.Sprintf("landmarks %s%s and %s%s have the same source position %s, %s; correct one, leave one out (%s) or use an affine model",
				p.IDs[first], p.lineOf(first), p.IDs[second], p.lineOf(second), formatVecUM(p.Source[first], p.Dim), what, p.IDs[second])}
		}
	}
	return nil
}

func within(a, b transform.Vec, dim int, tol float64) bool {
	for k := range dim {
		if d := a[k] - b[k]; d > tol || d < -tol {
			return false
		}
	}
	return true
}

// lineOf is " (line N)" for pair i when the problem knows its lines.
func (p *Problem) lineOf(i int) string {
	if i < len(p.Lines) && p.Lines[i] > 0 {
		return fmt.Sprintf(" (line %d)", p.Lines[i])
	}
	return ""
}

func formatVecUM(v transform.Vec, dim int) string {
	if dim == 2 {
		return fmt.Sprintf("(%g, %g) µm", v[0], v[1])
	}
	return fmt.Sprintf("(%g, %g, %g) µm", v[0], v[1], v[2])
}

// farOutlierFactor is how many times farther than the typical landmark
// from the median position a landmark must lie to be refused as a slip: a
// coordinate of 999999999 among landmarks a few hundred micrometres apart is
// a million times farther. A factor of 1e5 leaves every real layout alone
// (a field of view is never 100 000 times wider than the spacing of half
// its landmarks) and still catches the slips that made the fit report
// "source points lie on a plane" without naming any line.
const farOutlierFactor = 1e5

// farOutlier refuses a landmark that lies so far from the others that it can
// only be a slip (a typo, a wrong unit), naming it by id and line, on
// either side. Distances are from the per-axis median position and
// compared with their median.
func farOutlier(p *Problem) error {
	if p.Len() < 4 {
		return nil
	}
	for _, side := range []struct {
		name string
		pos  []transform.Vec
	}{{"source", p.Source}, {"target", p.Target}} {
		var centre transform.Vec
		vals := make([]float64, p.Len())
		for k := range p.Dim {
			for i, q := range side.pos {
				vals[i] = q[k]
			}
			centre[k] = sample.Median(vals)
		}
		dist := make([]float64, p.Len())
		for i, q := range side.pos {
			dist[i] = q.Sub(centre).Norm()
		}
		typical := sample.Median(dist)
		if !(typical > coincidentUM) {
			continue
		}
		worst := 0
		for i := range dist {
			if dist[i] > dist[worst] {
				worst = i
			}
		}
		if dist[worst] > farOutlierFactor*typical {
			return &PairError{ID: p.IDs[worst], Msg: fmt.Sprintf("landmark %s%s: its %s position %s lies %.3g µm from the landmarks' median position, %.2g times farther than the typical landmark (%.3g µm): a typo or a unit slip? Correct it or leave it out",
				p.IDs[worst], p.lineOf(worst), side.name, formatVecUM(side.pos[worst], p.Dim), dist[worst], dist[worst]/typical, typical)}
		}
	}
	return nil
}
