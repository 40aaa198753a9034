package match

import (
	"fmt"
	"io"
	"slices"
	"strings"

	"ferry/landmarks"
)

// Decisions are a person's verdicts on matches, by index into the cells and
// candidates they were resolved against (see ResolveDecisions). match,
// fit and refine take them: accepted pairs are fixed (and serve fit and
// refine as landmarks), rejected pairs are forbidden, and a cell with no
// counterpart is taken out of the assignment.
type Decisions struct {
	// Accepted maps a cell to the candidate it is.
	Accepted map[int]int
	// None holds the cells that have no counterpart among the candidates.
	None map[int]bool
	// Rejected maps a cell to the candidates it is not, in increasing
	// order.
	Rejected map[int][]int
}

// Len is the number of cells with a decision of any kind.
func (d *Decisions) Len() int {
	if d == nil {
		return 0
	}
	n := len(d.Accepted) + len(d.None)
	for c := range d.Rejected {
		if _, ok := d.Accepted[c]; !ok && !d.None[c] {
			n++
		}
	}
	return n
}

// Forbidden reports whether cell may not be matched to cand: the pair was
// rejected, or cand was accepted for another cell.
func (d *Decisions) Forbidden(cell, cand int) bool {
	if d == nil {
		return false
	}
	if _, ok := slices.BinarySearch(d.Rejected[cell], cand); ok {
		return true
	}
	for c, j := range d.Accepted {
		if j == cand && c != cell {
			return true
		}
	}
	return false
}

// FixedPairs are the accepted pairs as [cell, candidate] indices, by cell.
func (d *Decisions) FixedPairs() [][2]int {
	if d == nil {
		return nil
	}
	var out [][2]int
	for c, j := range d.Accepted {
		out = append(out, [2]int{c, j})
	}
	slices.SortFunc(out, func(a, b [2]int) int { return a[0] - b[0] })
	return out
}

// ForbiddenPairs are the rejected pairs as [cell, candidate] indices, by
// cell then candidate. (Candidates accepted for other cells are forbidden
// too; Forbidden says so.)
func (d *Decisions) ForbiddenPairs() [][2]int {
	if d == nil {
		return nil
	}
	var out [][2]int
	for c, js := range d.Rejected {
		for _, j := range js {
			out = append(out, [2]int{c, j})
		}
	}
	slices.SortFunc(out, func(a, b [2]int) int {
		if a[0] != b[0] {
			return a[0] - b[0]
		}
		return a[1] - b[1]
	})
	return out
}

// ResolveDecisions turns a decisions file into Decisions on cells and cands,
// checking that every cell and candidate named is in them and that no
// candidate is accepted for two cells. Faults are *landmarks.InputError
// naming the line and column of the decisions file.
func ResolveDecisions(set *landmarks.DecisionSet, cells, cands *landmarks.PointSet) (*Decisions, error) {
	cellAt := indexOf(cells)
	candAt := indexOf(cands)
	d := &Decisions{Accepted: map[int]int{}, None: map[int]bool{}, Rejected: map[int][]int{}}
	acceptedBy := map[int]landmarks.Decision{}
	for _, x := range set.Decisions {
		i, ok := cellAt[x.ID]
		if !ok {
			return nil, &landmarks.InputError{File: set.Path, Line: x.Line, Column: "id",
				Msg: fmt.Sprintf("cell %q is not in %s", x.ID, cells.Path)}
		}
		j := -1
		if x.Verdict != landmarks.NoCounterpart {
			if j, ok = candAt[x.Candidate]; !ok {
				return nil, &landmarks.InputError{File: set.Path, Line: x.Line, Column: "candidate",
					Msg: fmt.Sprintf("candidate %q is not in %s", x.Candidate, cands.Path)}
			}
		}
		switch x.Verdict {
		case landmarks.Accepted:
			if other, taken := acceptedBy[j]; taken {
				return nil, &landmarks.InputError{File: set.Path, Line: x.Line, Column: "candidate",
					Msg: fmt.Sprintf("candidate %q is accepted for cell %q here and for cell %q on line %d: a candidate is the counterpart of one cell at most", x.Candidate, x.ID, other.ID, other.Line)}
			}
			acceptedBy[j] = x
			d.Accepted[i] = j
		case landmarks.NoCounterpart:
			d.None[i] = true
		case landmarks.Rejected:
			d.Rejected[i] = append(d.Rejected[i], j)
		}
	}
	for c := range d.Rejected {
		slices.Sort(d.Rejected[c])
	}
	return d, nil
}

func indexOf(set *landmarks.PointSet) map[string]int {
	m := make(map[string]int, len(set.Points))
	for i, p := range set.Points {
		m[p.ID] = i
	}
	return m
}

// KindDecided is the landmark kind of the pairs a person accepted in review:
// kept apart from the landmark file's somata so that the fit estimates
// their noise on its own.
const KindDecided landmarks.Kind = "decided_soma"

// DecidedPrefix begins the landmark id of an accepted pair: the cell's id
// follows.
const DecidedPrefix = "decided:"

// LandmarkPairs are the accepted pairs as landmark pairs of KindDecided: the
// cell's source position and the candidate's target position, in the units
// the cells and candidates were read in, with the id DecidedPrefix + the
// cell's id. In order of the cells.
func (d *Decisions) LandmarkPairs(cells, cands *landmarks.PointSet) []landmarks.Pair {
	var out []landmarks.Pair
	for _, p := range d.FixedPairs() {
		c, n := cells.Points[p[0]], cands.Points[p[1]]
		out = append(out, landmarks.Pair{ID: DecidedPrefix + c.ID, Kind: KindDecided, Source: c.Pos, Target: n.Pos, Line: c.Line})
	}
	return out
}

// AddDecidedLandmarks appends the accepted pairs to a landmark set, for a
// fit (see LandmarkPairs). The set's extra columns are left empty for them.
// It refuses a set whose ids already hold one of the new ids, or whose
// dimension differs from the cells'.
func AddDecidedLandmarks(set *landmarks.PairSet, d *Decisions, cells, cands *landmarks.PointSet) error {
	if cells.Dim != set.Dim || cands.Dim != set.Dim {
		return fmt.Errorf("%s: %d-D landmarks with %d-D cells and %d-D candidates", set.Path, set.Dim, cells.Dim, cands.Dim)
	}
	seen := map[string]bool{}
	for _, p := range set.Pairs {
		seen[p.ID] = true
	}
	for _, p := range d.LandmarkPairs(cells, cands) {
		if seen[p.ID] {
			return fmt.Errorf("%s: the landmark id %q is taken; it is the id given to the accepted pair of cell %q", set.Path, p.ID, p.ID[len(DecidedPrefix):])
		}
		p.Extra = make([]string, len(set.ExtraColumns))
		set.Pairs = append(set.Pairs, p)
	}
	return nil
}

// WriteDecisions writes a decisions file: the header id, candidate,
// decision, decided_at, note and the set's extra columns, then one row per
// decision, in the set's order. It writes no provenance line: the file is
// the person's record, read back by review, match, fit and refine.
func WriteDecisions(w io.Writer, set *landmarks.DecisionSet) error {
	var b strings.Builder
	writeRow := func(fields []string) {
		for k, f := range fields {
			if k > 0 {
				b.WriteByte(',')
			}
			b.WriteString(csvField(f))
		}
		b.WriteByte('\n')
	}
	writeRow(append(append([]string(nil), landmarks.DecisionColumns...), set.ExtraColumns...))
	for _, d := range set.Decisions {
		row := []string{d.ID, d.Candidate, string(d.Verdict), d.DecidedAt, d.Note}
		for k := range set.ExtraColumns {
			v := ""
			if k < len(d.Extra) {
				v = d.Extra[k]
			}
			row = append(row, v)
		}
		writeRow(row)
	}
	_, err := io.WriteString(w, b.String())
	return err
}

// csvField quotes a field as encoding/csv would, and also when it begins
// with the comment mark, so that an id beginning with # reads back as an
// id.
func csvField(f string) string {
	if f == "" || !(f[0] == '#' || f[0] == ' ' || f[0] == '\t' || strings.ContainsAny(f, ",\"\r\n")) {
		return f
	}
	return `"` + strings.ReplaceAll(f, `"`, `""`) + `"`
}

// accepted is the candidate accepted for cell, if any.
func (d *Decisions) accepted(cell int) (int, bool) {
	if d == nil {
		return -1, false
	}
	j, ok := d.Accepted[cell]
	return j, ok
}

// applyDecisions takes the settled cells out of the assignment (no options:
// their no-match option then holds all their probability, and they weigh
// nothing in the prior) and strikes the forbidden candidates from the
// others' options, which is the posterior given that those pairs are not
// matches.
func applyDecisions(opts []cellOptions, d *Decisions, cellOrder, candOrder []int) {
	taken := map[int]bool{} // candidate indices accepted for some cell
	for _, j := range d.Accepted {
		taken[j] = true
	}
	for r, i := range cellOrder {
		o := &opts[r]
		if _, ok := d.Accepted[i]; ok || d.None[i] {
			*o = cellOptions{outside: o.outside, inReach: o.inReach}
			continue
		}
		rejected := d.Rejected[i]
		if len(taken) == 0 && len(rejected) == 0 {
			continue
		}
		ranks, ratios := o.ranks[:0], o.ratios[:0]
		for k, rank := range o.ranks {
			j := candOrder[rank]
			if _, no := slices.BinarySearch(rejected, j); no || taken[j] {
				continue
			}
			ranks, ratios = append(ranks, rank), append(ratios, o.ratios[k])
		}
		o.ranks, o.ratios = ranks, ratios
	}
}
