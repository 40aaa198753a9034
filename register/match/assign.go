package match

import (
	"container/heap"
	"errors"
	"math"
	"slices"
)

// sparseProblem is a rectangular assignment problem on a sparse bipartite
// graph: row r may take column col[k] at cost cost[k] for k in
// [start[r], start[r+1]). Every row must be assigned and no column twice.
// Edges of a row are in order of column, which, with the columns numbered
// in the order that breaks ties, makes the solution deterministic.
type sparseProblem struct {
	rows, cols int
	start      []int
	col        []int
	cost       []float64
}

// errInfeasible reports a problem in which some row cannot be assigned.
// match never builds one: each cell has a column of its own, its no-match
// option.
var errInfeasible = errors.New("assignment: a row has no column left")

// solve returns the column of each row in an assignment of least total
// cost, by the shortest augmenting path method of Jonker & Volgenant (1987,
// Computing 38:325–340) in the form for rectangular problems given by Crouse
// (2016, IEEE Trans. Aerospace and Electronic Systems 52(4):1679–1696), run
// on the sparse graph: each row in turn is joined to the assignment by a
// shortest path of reduced costs (Dijkstra's search with a heap over the
// columns the path can reach), and the dual potentials u, v are updated so
// that every reduced cost c − u − v stays ≥ 0. A search touches only the
// edges of the rows it visits, so a problem whose rows compete for few
// columns costs little more than its edges.
func (p *sparseProblem) solve() ([]int, error) {
	u := make([]float64, p.rows)
	v := make([]float64, p.cols)
	col4row := make([]int, p.rows)
	row4col := make([]int, p.cols)
	for i := range col4row {
		col4row[i] = -1
	}
	for j := range row4col {
		row4col[j] = -1
	}
	// Per-search state, reset through the lists of what was touched.
	dist := make([]float64, p.cols)
	path := make([]int, p.cols)
	done := make([]bool, p.cols)
	for j := range dist {
		dist[j] = math.Inf(1)
	}
	var touched, scanned, rowsSeen []int
	var h columnHeap

	for cur := range p.rows {
		h = h[:0]
		touched, scanned, rowsSeen = touched[:0], scanned[:0], rowsSeen[:0]
		i, minVal, sink := cur, 0.0, -1
		for sink < 0 {
			rowsSeen = append(rowsSeen, i)
			for k := p.start[i]; k < p.start[i+1]; k++ {
				j := p.col[k]
				if done[j] {
					continue
				}
				r := minVal + p.cost[k] - u[i] - v[j]
				if r < dist[j] {
					if math.IsInf(dist[j], 1) {
						touched = append(touched, j)
					}
					dist[j], path[j] = r, i
					heap.Push(&h, columnDist{col: j, dist: r})
				}
			}
			// The nearest column not yet scanned; stale heap entries are
			// those of columns since reached more cheaply or scanned.
			j := -1
			for h.Len() > 0 {
				c := heap.Pop(&h).(columnDist)
				if !done[c.col] && c.dist == dist[c.col] {
					j = c.col
					break
				}
			}
			if j < 0 {
				return nil, errInfeasible
			}
			minVal = dist[j]
			done[j] = true
			scanned = append(scanned, j)
			if row4col[j] < 0 {
				sink = j
			} else {
				i = row4col[j]
			}
		}
		u[cur] += minVal
		for _, r := range rowsSeen[1:] {
			u[r] += minVal - dist[col4row[r]]
		}
		for _, j := range scanned {
			v[j] -= minVal - dist[j]
		}
		// Augment along the path back from the sink.
		for j := sink; ; {
			r := path[j]
			row4col[j] = r
			col4row[r], j = j, col4row[r]
			if r == cur {
				break
			}
		}
		for _, j := range touched {
			dist[j] = math.Inf(1)
			done[j] = false
		}
	}
	return col4row, nil
}

type columnDist struct {
	col  int
	dist float64
}

// columnHeap orders columns by distance, ties to the lower column, so that
// equal paths are always resolved the same way.
type columnHeap []columnDist

func (h columnHeap) Len() int { return len(h) }
func (h columnHeap) Less(a, b int) bool {
	if h[a].dist != h[b].dist {
		return h[a].dist < h[b].dist
	}
	return h[a].col < h[b].col
}
func (h columnHeap) Swap(a, b int) { h[a], h[b] = h[b], h[a] }
func (h *columnHeap) Push(x any)   { *h = append(*h, x.(columnDist)) }
func (h *columnHeap) Pop() any {
	old := *h
	x := old[len(old)-1]
	*h = old[:len(old)-1]
	return x
}

// assign chooses for each cell (by rank) a candidate rank, or −1 for none,
// maximising the total log marginal probability of the choices with no
// candidate taken twice. Each cell has a no-match column of its own. The
// bipartite graph falls apart into connected components that are solved
// apart: they are small, since a cell reaches only candidates near it.
func assign(a *association, m marginals) ([]int, error) {
	kept := func(k int) bool { return m.edge[k] >= minEdgeP }
	chosen := make([]int, a.cells)
	local := map[int]int{}
	for _, rows := range a.components(kept) {
		if len(rows) == 1 && edgesOf(a, m, rows[0]) == 0 {
			chosen[rows[0]] = -1
			continue
		}
		// Columns: the component's candidates by rank, then each row's
		// no-match column.
		clear(local)
		var ranks []int
		for _, i := range rows {
			for k := a.start[i]; k < a.start[i+1]; k++ {
				if kept(k) {
					if _, ok := local[a.rank[k]]; !ok {
						local[a.rank[k]] = 0
						ranks = append(ranks, a.rank[k])
					}
				}
			}
		}
		slices.Sort(ranks)
		for c, r := range ranks {
			local[r] = c
		}
		p := &sparseProblem{rows: len(rows), cols: len(ranks) + len(rows), start: make([]int, len(rows)+1)}
		for r, i := range rows {
			for k := a.start[i]; k < a.start[i+1]; k++ {
				if kept(k) {
					p.col = append(p.col, local[a.rank[k]])
					p.cost = append(p.cost, -math.Log(m.edge[k]))
				}
			}
			p.col = append(p.col, len(ranks)+r)
			p.cost = append(p.cost, -math.Log(m.none[i]))
			p.start[r+1] = len(p.col)
		}
		cols, err := p.solve()
		if err != nil {
			return nil, err
		}
		for r, i := range rows {
			if c := cols[r]; c < len(ranks) {
				chosen[i] = ranks[c]
			} else {
				chosen[i] = -1
			}
		}
	}
	return chosen, nil
}

func edgesOf(a *association, m marginals, i int) int {
	n := 0
	for k := a.start[i]; k < a.start[i+1]; k++ {
		if m.edge[k] >= minEdgeP {
			n++
		}
	}
	return n
}
