package match

import (
	"container/heap"
	"errors"
	"math"
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
