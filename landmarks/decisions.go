package landmarks

import (
	"fmt"
	"io"
	"strings"
	"time"
)

// Verdict is what a person decided about a cell and a candidate.
type Verdict string

// The verdicts of a decisions file.
const (
	// Accepted: the cell is the candidate.
	Accepted Verdict = "accepted"
	// Rejected: the cell is not the candidate.
	Rejected Verdict = "rejected"
	// NoCounterpart: the cell has no counterpart among the candidates
	// (written "none"; the candidate column is empty).
	NoCounterpart Verdict = "none"
)

// Decision is one row of a decisions file.
type Decision struct {
	// ID is the cell; Candidate the candidate, empty for NoCounterpart.
	ID, Candidate string
	Verdict       Verdict
	// DecidedAt is the time of the decision as written (RFC 3339), or
	// empty; Note is free text.
	DecidedAt, Note string
	// Line is the physical line the row was read from.
	Line int
	// Extra holds the row's values of the set's ExtraColumns.
	Extra []string
}

// DecisionSet is a decisions file as read, with each later row for the same
// cell and candidate put in the place of the earlier one.
type DecisionSet struct {
	Path      string
	Decisions []Decision
	// ExtraColumns names the columns beyond id, candidate, decision,
	// decided_at and note, in file order.
	ExtraColumns []string
	SHA256       string
}

// DecisionColumns are the columns of a decisions file, in the order
// written.
var DecisionColumns = []string{"id", "candidate", "decision", "decided_at", "note"}

// ReadDecisions reads and checks the decisions file at path (see
// ParseDecisions).
func ReadDecisions(path string) (*DecisionSet, error) {
	return parseFile(path, ParseDecisions)
}

// ParseDecisions reads a decisions file from r: the columns id (a cell),
// candidate (empty for no counterpart), decision (accepted, rejected or
// none, in any case) and optionally decided_at (RFC 3339) and note; other
// columns are kept. A later row for the same cell and candidate replaces an
// earlier one, taking its place in the order; and since a cell has at most
// one counterpart, a later accepted or none row for a cell also replaces
// that cell's earlier accepted and none rows. A file with a header and no
// rows holds no decisions. Every fault is an *InputError naming the line and
// column.
func ParseDecisions(name string, r io.Reader) (*DecisionSet, error) {
	t, err := openTable(name, r)
	if err != nil {
		return nil, err
	}
	cols, err := t.require("", "id", "candidate", "decision")
	if err != nil {
		return nil, err
	}
	at, note := t.column("decided_at"), t.column("note")
	used := append([]int(nil), cols...)
	for _, c := range []int{at, note} {
		if c >= 0 {
			used = append(used, c)
		}
	}
	extraCols := t.extras(used...)
	set := &DecisionSet{Path: name, ExtraColumns: t.names(extraCols)}
	type key struct{ id, cand string }
	where := map[key]int{} // index in set.Decisions
	var block stringBlock
	for {
		ok, err := t.nextRow()
		if err != nil {
			return nil, err
		}
		if !ok {
			break
		}
		d := Decision{Line: t.line(0)}
		d.ID = strings.TrimSpace(t.record[cols[0]])
		if d.ID == "" {
			return nil, t.fail(cols[0], "empty id: every row names a cell")
		}
		d.Candidate = strings.TrimSpace(t.record[cols[1]])
		v := Verdict(strings.ToLower(strings.TrimSpace(t.record[cols[2]])))
		switch v {
		case Accepted, Rejected:
			if d.Candidate == "" {
				return nil, t.fail(cols[1], fmt.Sprintf("empty: a decision %s needs the candidate it is about (use none for no counterpart)", v))
			}
		case NoCounterpart:
			if d.Candidate != "" {
				return nil, t.fail(cols[1], fmt.Sprintf("%s given with decision none: leave the candidate empty when the cell has no counterpart", quote(d.Candidate)))
			}
		default:
			return nil, t.fail(cols[2], fmt.Sprintf("%s is not a decision: want accepted, rejected or none", quote(t.record[cols[2]])))
		}
		d.Verdict = v
		if at >= 0 {
			d.DecidedAt = strings.TrimSpace(t.record[at])
			if d.DecidedAt != "" {
				if _, err := time.Parse(time.RFC3339, d.DecidedAt); err != nil {
					return nil, t.fail(at, fmt.Sprintf("%s is not a time: want RFC 3339, e.g. 2026-03-01T14:05:00Z", quote(d.DecidedAt)))
				}
			}
		}
		if note >= 0 {
			d.Note = t.record[note]
		}
		d.Extra = t.extraValues(&block, extraCols, &d.ID)
		d.Candidate = strings.Clone(d.Candidate)

		k := key{d.ID, d.Candidate}
		if i, seen := where[k]; seen {
			set.Decisions[i] = d
		} else {
			where[k] = len(set.Decisions)
			set.Decisions = append(set.Decisions, d)
		}
		if v == Accepted || v == NoCounterpart {
			// Drop the cell's other accepted and none rows.
			keep := set.Decisions[:0]
			for _, o := range set.Decisions {
				if o.ID == d.ID && o.Candidate != d.Candidate && (o.Verdict == Accepted || o.Verdict == NoCounterpart) {
					continue
				}
				keep = append(keep, o)
			}
			if len(keep) != len(set.Decisions) {
				set.Decisions = keep
				clear(where)
				for i, o := range set.Decisions {
					where[key{o.ID, o.Candidate}] = i
				}
			}
		}
	}
	set.SHA256 = t.text.SHA256()
	return set, nil
}
