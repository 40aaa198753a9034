package refine

import (
	"fmt"
	"slices"

	"ferry/register/match"
)

// checkDecisions refuses decisions that index past the somata or the
// candidates.
func checkDecisions(d *match.Decisions, nSomata, nCands int) error {
	if d == nil {
		return nil
	}
	bad := func(i, n int) bool { return i < 0 || i >= n }
	for i, j := range d.Accepted {
		if bad(i, nSomata) || bad(j, nCands) {
			return fmt.Errorf("refine: accepted pair (soma %d, candidate %d) outside the %d somata and %d candidates", i, j, nSomata, nCands)
		}
	}
	for i := range d.None {
		if bad(i, nSomata) {
			return fmt.Errorf("refine: soma %d with no counterpart outside the %d somata", i, nSomata)
		}
	}
	for i, js := range d.Rejected {
		for _, j := range js {
			if bad(i, nSomata) || bad(j, nCands) {
				return fmt.Errorf("refine: rejected pair (soma %d, candidate %d) outside the %d somata and %d candidates", i, j, nSomata, nCands)
			}
		}
	}
	return nil
}

// withAccepted adds the accepted candidates to near (ascending): an
// accepted candidate must be seen by the rounds' matchings, which then
// keep it from every other soma.
func withAccepted(near []int, d *match.Decisions) []int {
	if d == nil {
		return near
	}
	for _, j := range d.Accepted {
		if k, ok := slices.BinarySearch(near, j); !ok {
			near = slices.Insert(near, k, j)
		}
	}
	return near
}

// localDecisions are d with the candidates indexed into cand, the
// candidates the rounds see (ascending). A rejected candidate they do not
// see cannot be chosen anyway and is dropped; the accepted ones are all
// among them (withAccepted).
func localDecisions(d *match.Decisions, cand []int) *match.Decisions {
	if d == nil {
		return nil
	}
	local := func(j int) (int, bool) { return slices.BinarySearch(cand, j) }
	out := &match.Decisions{Accepted: map[int]int{}, None: map[int]bool{}, Rejected: map[int][]int{}}
	for i, j := range d.Accepted {
		k, _ := local(j)
		out.Accepted[i] = k
	}
	for i := range d.None {
		out.None[i] = true
	}
	for i, js := range d.Rejected {
		for _, j := range js {
			if k, ok := local(j); ok {
				out.Rejected[i] = append(out.Rejected[i], k)
			}
		}
	}
	return out
}
