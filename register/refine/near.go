package refine

import (
	"math"

	"ferry/register"
	"ferry/status"
	"ferry/transform"
)

// Candidates that no soma can reach change no match (package match leaves
// them out itself), but every round would index them again. Refine keeps
// only those within nearMarginUM + nearR95s·r95 of some soma's position
// under the landmark fit: the search radius of a soma is at most about
// 1.7·r95 (√χ²₃(0.9999)/√χ²₃(0.95)), its density neighbours lie within
// 50 µm wherever there are more than about 3·10⁴ candidates per mm³, and
// the refinement moves a soma by far less than r95.
const (
	nearMarginUM = 50.0
	nearR95s     = 3.0
)

// nearCandidates lists, in ascending order, the candidates near enough to
// some soma mapped by mapper to matter.
func nearCandidates(mapper *register.Mapper, somata []transform.Vec, cellSD *transform.Vec, cands []transform.Vec, dim int) []int {
	mapped := mapper.MapAll(somata, cellSD, false)
	const box = 25.0 // µm, the cell of the marking grid
	key := func(x transform.Vec) [3]int {
		var k [3]int
		for a := range dim {
			k[a] = int(math.Floor(x[a] / box))
		}
		return k
	}
	marked := map[[3]int]bool{}
	for _, m := range mapped {
		if m.Status == status.NoInverse || !m.Pos.IsFinite() {
			continue
		}
		d := nearMarginUM + nearR95s*m.R95
		if math.IsInf(d, 0) || math.IsNaN(d) {
			continue
		}
		n := int(math.Ceil(d/box)) + 1
		c := key(m.Pos)
		nz := n
		if dim == 2 {
			nz = 0
		}
		for i := -n; i <= n; i++ {
			for j := -n; j <= n; j++ {
				for k := -nz; k <= nz; k++ {
					marked[[3]int{c[0] + i, c[1] + j, c[2] + k}] = true
				}
			}
		}
	}
	var keep []int
	for j, y := range cands {
		if marked[key(y)] {
			keep = append(keep, j)
		}
	}
	return keep
}
