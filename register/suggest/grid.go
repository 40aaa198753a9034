package suggest

import (
	"errors"
	"fmt"
	"math"

	"ferry/transform"
)

// GridTarget is the least number of nodes of the default grid of candidate
// locations: enough that neighbouring nodes differ little in their gain,
// few enough that the search takes seconds.
const GridTarget = 4000

// BlockGridTarget is the same for a rigid motion or a similarity. Their
// covariance between two points is a polynomial of low degree in the
// positions (G(x)N⁻¹G(z)ᵀ with G affine in x), so neighbouring nodes differ
// even less, while their search, with 3×3 factors, costs several times more
// per node.
const BlockGridTarget = 500

// Bounds is the bounding box (µm) of the first dim coordinates of all the
// points given.
func Bounds(dim int, sets ...[]transform.Vec) (lo, hi transform.Vec) {
	for k := range dim {
		lo[k], hi[k] = math.Inf(1), math.Inf(-1)
	}
	for _, set := range sets {
		for _, p := range set {
			for k := range dim {
				lo[k] = math.Min(lo[k], p[k])
				hi[k] = math.Max(hi[k], p[k])
			}
		}
	}
	return lo, hi
}

// Grid returns the nodes of a regular grid over the box [lo, hi] (µm) and
// its spacing h: the largest h for which the grid has at least target
// nodes, where an axis of extent L carries ⌊L/h⌋ + 1 nodes h apart,
// centred on the box. An axis of no extent carries one node. The nodes run
// x fastest, then y, then z.
func Grid(dim int, lo, hi transform.Vec, target int) ([]transform.Vec, float64, error) {
	if dim != 2 && dim != 3 {
		return nil, 0, fmt.Errorf("dimension %d: want 2 or 3", dim)
	}
	if target < 1 {
		return nil, 0, fmt.Errorf("grid of %d nodes: want at least one", target)
	}
	var extent transform.Vec
	largest := 0.0
	for k := range dim {
		extent[k] = hi[k] - lo[k]
		if !(extent[k] >= 0) || math.IsInf(extent[k], 0) || !lo.IsFinite() {
			return nil, 0, fmt.Errorf("box from %v to %v µm is not a box", lo, hi)
		}
		largest = math.Max(largest, extent[k])
	}
	if largest == 0 {
		return nil, 0, errors.New("the landmarks and cells all lie at one point: there is no volume to place candidates in")
	}
	count := func(h float64) (n [3]int, total int) {
		total = 1
		for k := range 3 {
			n[k] = 1
			if k < dim {
				n[k] = int(math.Floor(extent[k]/h)) + 1
			}
			total *= n[k]
		}
		return n, total
	}
	// count falls as h grows; bisect for the largest h that still gives
	// target nodes. At h = largest/target the longest axis alone has more.
	small, large := largest/float64(target), largest
	if _, total := count(large); total >= target {
		small = large
	}
	for range 200 {
		if large-small <= 1e-12*large {
			break
		}
		mid := 0.5 * (small + large)
		if _, total := count(mid); total >= target {
			small = mid
		} else {
			large = mid
		}
	}
	h := small
	n, total := count(h)
	var start transform.Vec
	for k := range dim {
		start[k] = lo[k] + 0.5*(extent[k]-float64(n[k]-1)*h)
	}
	nodes := make([]transform.Vec, 0, total)
	for c := range n[2] {
		for b := range n[1] {
			for a := range n[0] {
				p := transform.Vec{start[0] + float64(a)*h, start[1] + float64(b)*h}
				if dim == 3 {
					p[2] = start[2] + float64(c)*h
				}
				nodes = append(nodes, p)
			}
		}
	}
	return nodes, h, nil
}
