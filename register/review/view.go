package review

import (
	"fmt"
	"math"

	"ferry/landmarks"
	"ferry/status"
	"ferry/transform"
)

// View window: the half-width of the square shown around a cell is
// windowR95 times its r95, within [minHalfUM, maxHalfUM]: wide enough to
// show the candidates that compete with the proposal and the neighbours
// that give the constellation, small enough that a soma is several pixels
// across.
const (
	windowR95 = 2.5
	minHalfUM = 12
	maxHalfUM = 60
	// panelPixels is the width and height of each image panel.
	panelPixels = 192
	// minShownP is the least posterior probability of a candidate that
	// the page lists beside the image (every candidate in the window is
	// drawn).
	minShownP = 1e-4
)

// Candidate is a candidate drawn around a cell: its position relative to
// the mapped cell (µm, target frame) and its posterior probability of being
// the cell's counterpart (0 when below 10⁻⁴ or not weighed at all).
type Candidate struct {
	ID       string  `json:"id"`
	DX       float64 `json:"dx"`
	DY       float64 `json:"dy"`
	DZ       float64 `json:"dz"`
	P        float64 `json:"p"`
	Proposed bool    `json:"proposed"`
	// TakenBy names the cell that this candidate was accepted for, when it
	// is another.
	TakenBy string `json:"taken_by,omitempty"`
}

// Neighbour is another mapped cell inside the window, with the candidate
// accepted for it, if any.
type Neighbour struct {
	ID         string      `json:"id"`
	DX         float64     `json:"dx"`
	DY         float64     `json:"dy"`
	DZ         float64     `json:"dz"`
	Accepted   string      `json:"accepted,omitempty"`
	AcceptedAt *[3]float64 `json:"accepted_at,omitempty"`
}

// CellView is what the page shows of one cell.
type CellView struct {
	// Index is the cell's place in the order shown, from 0.
	Index int    `json:"index"`
	Total int    `json:"total"`
	ID    string `json:"id"`
	// Status is the match's status; MappedStatus the mapping's.
	Status       string        `json:"status"`
	MappedStatus status.Status `json:"mapped_status"`
	Proposed     string        `json:"proposed"`
	PMatch       float64       `json:"p_match"`
	PNone        float64       `json:"p_none"`
	R95          float64       `json:"r95_um"`
	// Position is the mapped cell in the target frame (µm).
	Position [3]float64 `json:"position_um"`
	// HalfUM is the half-width of the window and PixelUM the pixel size of
	// the panels (µm), Pixels their width and height.
	HalfUM     float64     `json:"half_um"`
	PixelUM    float64     `json:"pixel_um"`
	Pixels     int         `json:"pixels"`
	Candidates []Candidate `json:"candidates"`
	Neighbours []Neighbour `json:"neighbours"`
	// Decision is the cell's decision so far ("accepted", "none" or "")
	// and DecidedCandidate the candidate accepted.
	Decision         string `json:"decision"`
	DecidedCandidate string `json:"decided_candidate"`
	// Extra are the cell's own columns, for the person's reference.
	Extra map[string]string `json:"extra,omitempty"`
}

// Progress counts decided cells per match status.
type Progress struct {
	Status  string `json:"status"`
	Decided int    `json:"decided"`
	Total   int    `json:"total"`
}

// State is the review as a whole: the order, the first cell without a
// decision (where a session resumes) and the progress.
type State struct {
	Order    []string   `json:"order"`
	Resume   int        `json:"resume"`
	Progress []Progress `json:"progress"`
	Decided  int        `json:"decided"`
	Total    int        `json:"total"`
	File     string     `json:"decisions_file"`
}

// State reports the order, where to resume and the progress.
func (s *Session) State() State {
	s.mu.Lock()
	defer s.mu.Unlock()
	st := State{Total: len(s.order), Resume: -1, File: s.in.DecisionsPath}
	counts := map[string]*Progress{}
	var statuses []string
	for k, i := range s.order {
		id := s.in.Cells.Points[i].ID
		st.Order = append(st.Order, id)
		status := string(s.matchOf[id].Status)
		if status == "" {
			status = "not in the matches"
		}
		p, ok := counts[status]
		if !ok {
			p = &Progress{Status: status}
			counts[status] = p
			statuses = append(statuses, status)
		}
		p.Total++
		if v, _ := s.decisionOf(id); v != "" {
			p.Decided++
			st.Decided++
		} else if st.Resume < 0 {
			st.Resume = k
		}
	}
	if st.Resume < 0 {
		st.Resume = len(s.order)
	}
	for _, name := range statuses {
		st.Progress = append(st.Progress, *counts[name])
	}
	return st
}

// Cell is the view of the cell at place k of the order.
func (s *Session) Cell(k int) (*CellView, error) {
	if k < 0 || k >= len(s.order) {
		return nil, fmt.Errorf("no cell at place %d: there are %d", k, len(s.order))
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	i := s.order[k]
	c := s.in.Cells.Points[i]
	m, inTable := s.matchOf[c.ID]
	r := s.results[i]
	mp := s.mapped[i]
	v := &CellView{Index: k, Total: len(s.order), ID: c.ID, MappedStatus: mp.Status, R95: finite(mp.R95),
		Candidates: []Candidate{}, Neighbours: []Neighbour{},
		PMatch: finite(m.PMatch), PNone: finite(m.PNone), Proposed: m.Candidate, Status: string(m.Status)}
	if !inTable {
		v.Status, v.PNone = "not in the matches", finite(r.PNone)
	}
	v.Position = [3]float64(mp.Pos)
	v.HalfUM = halfWidth(mp.R95)
	v.Pixels = panelPixels
	v.PixelUM = 2 * v.HalfUM / panelPixels
	verdict, cand := s.decisionOf(c.ID)
	v.Decision, v.DecidedCandidate = string(verdict), cand
	if len(c.Extra) > 0 {
		v.Extra = map[string]string{}
		for n, name := range s.in.Cells.ExtraColumns {
			v.Extra[name] = c.Extra[n]
		}
	}

	takenBy := map[string]string{}
	accepted := map[string]string{} // cell → candidate
	for _, d := range s.decided.Decisions {
		if d.Verdict == landmarks.Accepted {
			takenBy[d.Candidate] = d.ID
			accepted[d.ID] = d.Candidate
		}
	}
	prob := map[int]float64{}
	for _, o := range r.Options {
		prob[o.Candidate] = o.P
	}
	// Every candidate inside the window (a cube of half-width HalfUM).
	for j, q := range s.in.CandidatePos {
		d := q.Sub(mp.Pos)
		if math.Abs(d[0]) > v.HalfUM || math.Abs(d[1]) > v.HalfUM || math.Abs(d[2]) > v.HalfUM {
			continue
		}
		id := s.in.Candidates.Points[j].ID
		cv := Candidate{ID: id, DX: d[0], DY: d[1], DZ: d[2], P: prob[j], Proposed: id == m.Candidate}
		if cv.P < minShownP {
			cv.P = 0
		}
		if other := takenBy[id]; other != "" && other != c.ID {
			cv.TakenBy = other
		}
		v.Candidates = append(v.Candidates, cv)
	}
	for n, q := range s.mapped {
		if n == i {
			continue
		}
		d := q.Pos.Sub(mp.Pos)
		if math.Abs(d[0]) > v.HalfUM || math.Abs(d[1]) > v.HalfUM || math.Abs(d[2]) > v.HalfUM {
			continue
		}
		id := s.in.Cells.Points[n].ID
		nb := Neighbour{ID: id, DX: d[0], DY: d[1], DZ: d[2]}
		if a := accepted[id]; a != "" {
			nb.Accepted = a
			at := s.in.CandidatePos[s.candAt[a]].Sub(mp.Pos)
			nb.AcceptedAt = &[3]float64{at[0], at[1], at[2]}
		}
		v.Neighbours = append(v.Neighbours, nb)
	}
	return v, nil
}

func finite(x float64) float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0
	}
	return x
}

// centre returns the cell's mapped position and window half-width.
func (s *Session) centre(k int) (transform.Vec, float64, error) {
	if k < 0 || k >= len(s.order) {
		return transform.Vec{}, 0, fmt.Errorf("no cell at place %d", k)
	}
	mp := s.mapped[s.order[k]]
	return mp.Pos, halfWidth(mp.R95), nil
}

// halfWidth is the half-width of the window around a cell of 95 % radius
// r95 (µm); a radius that is not finite gets the widest window.
func halfWidth(r95 float64) float64 {
	if math.IsNaN(r95) || math.IsInf(r95, 0) {
		return maxHalfUM
	}
	return math.Min(math.Max(windowR95*r95, minHalfUM), maxHalfUM)
}
