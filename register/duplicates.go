package register

import (
	"fmt"
	"sort"

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
			return fmt.Errorf("landmarks %s%s and %s%s have the same source position %s, %s; correct one, leave one out (--exclude %s) or use --model affine",
				p.IDs[first], p.lineOf(first), p.IDs[second], p.lineOf(second), formatVecUM(p.Source[first], p.Dim), what, p.IDs[second])
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
