package match

import (
	"sort"

	"gonum.org/v1/gonum/spatial/kdtree"

	"ferry/transform"
)

// point is a candidate in the k-d tree, with its rank (its place in the
// order that breaks ties) so that a search says which candidate it found.
type point struct {
	pos  transform.Vec
	rank int
	dim  int
}

func (p point) Compare(c kdtree.Comparable, d kdtree.Dim) float64 { return p.pos[d] - c.(point).pos[d] }
func (p point) Dims() int                                         { return p.dim }

// Distance is the squared Euclidean distance, as kdtree's keepers expect.
func (p point) Distance(c kdtree.Comparable) float64 {
	q := c.(point)
	var s float64
	for k := range p.dim {
		d := p.pos[k] - q.pos[k]
		s += d * d
	}
	return s
}

type points []point

func (p points) Index(i int) kdtree.Comparable         { return p[i] }
func (p points) Len() int                              { return len(p) }
func (p points) Slice(start, end int) kdtree.Interface { return p[start:end] }

// Pivot uses the median of medians rather than kdtree's default median of
// random samples, so that the tree, and every search of it, is the same on
// every run.
func (p points) Pivot(d kdtree.Dim) int {
	pl := plane{points: p, dim: d}
	return kdtree.Partition(pl, kdtree.MedianOfMedians(pl))
}

type plane struct {
	points
	dim kdtree.Dim
}

func (p plane) Less(i, j int) bool { return p.points[i].pos[p.dim] < p.points[j].pos[p.dim] }
func (p plane) Swap(i, j int)      { p.points[i], p.points[j] = p.points[j], p.points[i] }
func (p plane) Slice(start, end int) kdtree.SortSlicer {
	return plane{points: p.points[start:end], dim: p.dim}
}

// candidateTree finds candidates near a point.
type candidateTree struct {
	tree *kdtree.Tree
	dim  int
	n    int
}

// newCandidateTree indexes pos, whose i-th entry has rank i.
func newCandidateTree(pos []transform.Vec, dim int) *candidateTree {
	pts := make(points, len(pos))
	for i, p := range pos {
		pts[i] = point{pos: p, rank: i, dim: dim}
	}
	return &candidateTree{tree: kdtree.New(pts, false), dim: dim, n: len(pos)}
}

// neighbour is a candidate found by a search: its rank and squared
// distance (µm²).
type neighbour struct {
	rank  int
	dist2 float64
}

// within returns the candidates within radius r (µm) of x, by rank.
func (t *candidateTree) within(x transform.Vec, r float64) []neighbour {
	if t.n == 0 {
		return nil
	}
	keep := kdtree.NewDistKeeper(r * r)
	t.tree.NearestSet(keep, point{pos: x, rank: -1, dim: t.dim})
	out := make([]neighbour, 0, len(keep.Heap))
	for _, c := range keep.Heap {
		if c.Comparable == nil {
			continue
		}
		out = append(out, neighbour{rank: c.Comparable.(point).rank, dist2: c.Dist})
	}
	sort.Slice(out, func(i, j int) bool { return out[i].rank < out[j].rank })
	return out
}

// kthDistance is the distance (µm) from x to its k-th nearest candidate,
// k ≤ the number of candidates.
func (t *candidateTree) kthDistance(x transform.Vec, k int) float64 {
	keep := kdtree.NewNKeeper(k)
	t.tree.NearestSet(keep, point{pos: x, rank: -1, dim: t.dim})
	far := 0.0
	for _, c := range keep.Heap {
		if c.Comparable != nil && c.Dist > far {
			far = c.Dist
		}
	}
	return sqrt(far)
}

// nearest is the rank of the candidate nearest x and its distance (µm), ties
// going to the lower rank; rank −1 when there are no candidates.
func (t *candidateTree) nearest(x transform.Vec) (int, float64) {
	if t.n == 0 {
		return -1, 0
	}
	c, d := t.tree.Nearest(point{pos: x, rank: -1, dim: t.dim})
	// Other candidates at exactly the same distance: take the lowest rank.
	best := c.(point).rank
	for _, nb := range t.within(x, sqrt(d)) {
		if nb.dist2 <= d && nb.rank < best {
			best = nb.rank
		}
	}
	return best, sqrt(d)
}
