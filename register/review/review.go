package review

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"sync"
	"time"

	"ferry/imaging"
	"ferry/landmarks"
	"ferry/outfile"
	"ferry/register"
	"ferry/register/match"
	"ferry/status"
	"ferry/transform"
)

// Inputs are what a review works on.
type Inputs struct {
	Transform *register.Registration
	Mapper    *register.Mapper
	// Cells (source) and Candidates (target) as read, with their
	// positions in micrometres.
	Cells, Candidates     *landmarks.PointSet
	CellPos, CandidatePos []transform.Vec
	CellSD                *transform.Vec
	// Matches are the rows of the matches file, read from MatchesPath.
	Matches     []match.Row
	MatchesPath string
	// MatchOptions steer the posterior probabilities of the candidates in
	// reach (the same as match's flags).
	MatchOptions match.Options
	// Source and Target are the stacks; SourceVoxel and TargetVoxel their
	// voxel sizes (µm) and TargetOffset the EM frame position (µm) of the
	// target stack's voxel (0, 0, 0).
	Source, Target           *imaging.Volume
	SourceVoxel, TargetVoxel transform.Vec
	TargetOffset             transform.Vec
	// DecisionsPath is the decisions file, read when it exists and
	// rewritten after every decision.
	DecisionsPath string
}

// Session is a review in progress. Its methods are safe for concurrent use.
type Session struct {
	in      Inputs
	mapped  []register.Mapped
	results []match.Result
	order   []int // cell indices in the order shown
	matchOf map[string]match.Row
	cellAt  map[string]int
	candAt  map[string]int
	mu      sync.Mutex
	decided *landmarks.DecisionSet
	now     func() time.Time
	imageMu sync.Mutex
	halfUM  float64
	pixels  int
}

// NewSession prepares a review: maps the cells, weighs the candidates
// around each (with the decisions already made, so that an accepted
// candidate is no longer offered to a neighbour), reads the decisions file
// when it exists and orders the cells.
func NewSession(in Inputs) (*Session, error) {
	s := &Session{in: in, matchOf: map[string]match.Row{}, now: time.Now}
	s.cellAt = map[string]int{}
	for i, p := range in.Cells.Points {
		s.cellAt[p.ID] = i
	}
	s.candAt = map[string]int{}
	for j, p := range in.Candidates.Points {
		s.candAt[p.ID] = j
	}
	for _, m := range in.Matches {
		if _, ok := s.cellAt[m.ID]; !ok {
			return nil, fmt.Errorf("%s: cell %q is not in %s: are they the cells the matches were made of?", in.MatchesPath, m.ID, in.Cells.Path)
		}
		if m.Candidate != "" {
			if _, ok := s.candAt[m.Candidate]; !ok {
				return nil, fmt.Errorf("%s: candidate %q of cell %q is not in %s: are they the candidates the matches were made of?", in.MatchesPath, m.Candidate, m.ID, in.Candidates.Path)
			}
		}
		s.matchOf[m.ID] = m
	}
	s.decided = &landmarks.DecisionSet{Path: in.DecisionsPath}
	if _, err := os.Stat(in.DecisionsPath); err == nil {
		set, err := landmarks.ReadDecisions(in.DecisionsPath)
		if err != nil {
			return nil, err
		}
		if _, err := match.ResolveDecisions(set, in.Cells, in.Candidates); err != nil {
			return nil, err
		}
		s.decided = set
	}
	opt := in.MatchOptions
	opt.CellIDs, opt.CandidateIDs = ids(in.Cells), ids(in.Candidates)
	opt.Dim = in.Cells.Dim
	var err error
	if s.results, err = match.Match(in.Mapper, in.CellPos, in.CellSD, in.CandidatePos, opt); err != nil {
		return nil, err
	}
	s.mapped = make([]register.Mapped, len(s.results))
	for i, r := range s.results {
		s.mapped[i] = r.Mapped
	}
	s.order = Order(in.Cells, in.Matches)
	return s, nil
}

func ids(set *landmarks.PointSet) []string {
	out := make([]string, len(set.Points))
	for i, p := range set.Points {
		out[i] = p.ID
	}
	return out
}

// Order is the order in which the cells are shown: the cells of the matches
// table, ambiguous first, then by the probability of the proposed choice
// (p_match, or p_none where no candidate is proposed), lowest first, ties
// by id. Cells missing from the table come last, by id.
func Order(cells *landmarks.PointSet, ms []match.Row) []int {
	byID := map[string]match.Row{}
	for _, m := range ms {
		byID[m.ID] = m
	}
	order := make([]int, len(cells.Points))
	for i := range order {
		order[i] = i
	}
	key := func(i int) (int, float64) {
		m, ok := byID[cells.Points[i].ID]
		if !ok {
			return 2, 0
		}
		rank := 1
		if m.Status == status.Ambiguous {
			rank = 0
		}
		return rank, proposalP(m)
	}
	slices.SortStableFunc(order, func(a, b int) int {
		ra, pa := key(a)
		rb, pb := key(b)
		switch {
		case ra != rb:
			return ra - rb
		case pa < pb:
			return -1
		case pa > pb:
			return 1
		}
		return cmpString(cells.Points[a].ID, cells.Points[b].ID)
	})
	return order
}

func cmpString(a, b string) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// proposalP is the probability of the row's choice.
func proposalP(m match.Row) float64 {
	p := m.PMatch
	if m.Candidate == "" || math.IsNaN(p) {
		p = m.PNone
	}
	if math.IsNaN(p) {
		return 0
	}
	return p
}

// decisionOf is the cell's current decision: "accepted" with the
// candidate, "none", or "" when the cell has none.
func (s *Session) decisionOf(id string) (verdict landmarks.Verdict, cand string) {
	for _, d := range s.decided.Decisions {
		if d.ID == id && d.Verdict != landmarks.Rejected {
			verdict, cand = d.Verdict, d.Candidate
		}
	}
	return verdict, cand
}

// Decide records a decision for the cell and rewrites the decisions file:
// the cell's earlier rows go, and one row takes their place: accepted with
// the candidate, or none (candidate empty). verdict "" clears the cell.
func (s *Session) Decide(ctx context.Context, id string, verdict landmarks.Verdict, cand, note string) error {
	if _, ok := s.cellAt[id]; !ok {
		return fmt.Errorf("no cell %q", id)
	}
	switch verdict {
	case landmarks.Accepted:
		if _, ok := s.candAt[cand]; !ok {
			return fmt.Errorf("no candidate %q", cand)
		}
	case landmarks.NoCounterpart, "":
		cand = ""
	default:
		return fmt.Errorf("decision %q: want accepted or none", verdict)
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if verdict == landmarks.Accepted {
		for _, d := range s.decided.Decisions {
			if d.Verdict == landmarks.Accepted && d.Candidate == cand && d.ID != id {
				return fmt.Errorf("candidate %s is already accepted for cell %s: undo that first", cand, d.ID)
			}
		}
	}
	next := *s.decided
	next.Decisions = nil
	for _, d := range s.decided.Decisions {
		if d.ID != id {
			next.Decisions = append(next.Decisions, d)
		}
	}
	if verdict != "" {
		next.Decisions = append(next.Decisions, landmarks.Decision{ID: id, Candidate: cand, Verdict: verdict,
			DecidedAt: s.now().UTC().Format(time.RFC3339), Note: note})
	}
	if err := outfile.Write(ctx, s.in.DecisionsPath, func(w io.Writer) error {
		return match.WriteDecisions(w, &next)
	}); err != nil {
		return err
	}
	s.decided = &next
	return nil
}
