package refine

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
	"strconv"

	"ferry/landmarks"
	"ferry/register"
	"ferry/transform"
)

// The scenarios of these tests are our own, independent of
// simulate: a block of cortex with somata packed at the density of
// EM nuclei, warped by one of several kinds of distortion on top of an
// affine change (rotation, EM shrinkage), with landmarks, imaged cells and
// nuclei picked with noise. They are invented for the tests.

// warpKind names a family of distortions.
type warpKind string

const (
	warpPolynomial  warpKind = "polynomial"  // smooth quadratic and cubic terms
	warpBumps       warpKind = "bumps"       // local Gaussian displacements of several sizes
	warpCompression warpKind = "compression" // depth-dependent compression
	warpShear       warpKind = "shear"       // sections sheared against each other
)

var warpKinds = []warpKind{warpPolynomial, warpBumps, warpCompression, warpShear}

// scenarioParams describe one scenario.
type scenarioParams struct {
	Warp      warpKind
	Landmarks int
	// Size is the block (source µm); the imaged cells lie inside it.
	Size transform.Vec
	// Density of somata (per µm³): 9e-5 is 9·10⁴ per mm³.
	Density float64
	// Cells imaged, and the share of them whose nucleus is not among the
	// candidates.
	Cells        int
	MissingShare float64
	// CellSD is the in vivo localisation error; NucleusSD the offset of a
	// nucleus centre from its soma centre with its segmentation error.
	CellSD    transform.Vec
	NucleusSD float64
	// PickSource and PickTarget are the landmarks' picking errors.
	PickSource, PickTarget float64
	// Amplitude scales the non-affine warp (µm).
	Amplitude float64
	// Margin is how far the EM volume (the somata, hence the candidates)
	// reaches beyond the block on every side (µm); zero means 30 µm.
	Margin transform.Vec
}

func defaultParams(w warpKind, nLandmarks int, zSD float64) scenarioParams {
	return scenarioParams{
		Warp: w, Landmarks: nLandmarks, Size: transform.Vec{500, 500, 350},
		Density: 9e-5, Cells: 700, MissingShare: 0.05,
		CellSD: transform.Vec{0.5, 0.5, zSD}, NucleusSD: 1.0,
		PickSource: 0.7, PickTarget: 0.4, Amplitude: 14,
	}
}

// scenario is one invented data set with its truth.
type scenario struct {
	Params      scenarioParams
	Warp        func(transform.Vec) transform.Vec
	Landmarks   *register.Problem
	Cells       []transform.Vec // measured in vivo positions
	CellTruth   []transform.Vec // true EM soma centres W(x)
	CellIDs     []string
	Counterpart []int // candidate index of each cell's nucleus, −1 none
	Candidates  []transform.Vec
	CandIDs     []string
}

// newScenario builds a scenario from seed.
func newScenario(pr scenarioParams, seed uint64) *scenario {
	rng := rand.New(rand.NewPCG(seed, 0x5eed))
	s := &scenario{Params: pr}
	s.Warp = makeWarp(pr, rng)

	// Somata as a hard-core process: uniform proposals at least minGap
	// apart (somata do not overlap), over the block and a margin around it
	// so that the EM volume holds nuclei all round the imaged field.
	const minGap = 7.0
	margin := pr.Margin
	if margin == (transform.Vec{}) {
		margin = transform.Vec{30, 30, 30}
	}
	lo := margin.Scale(-1)
	hi := pr.Size.Add(margin)
	vol := (hi[0] - lo[0]) * (hi[1] - lo[1]) * (hi[2] - lo[2])
	want := int(pr.Density * vol)
	g := newGapGrid(minGap)
	var somata []transform.Vec
	for tries := 0; len(somata) < want && tries < 50*want; tries++ {
		x := transform.Vec{lo[0] + rng.Float64()*(hi[0]-lo[0]), lo[1] + rng.Float64()*(hi[1]-lo[1]), lo[2] + rng.Float64()*(hi[2]-lo[2])}
		if g.free(x) {
			g.add(x)
			somata = append(somata, x)
		}
	}
	// Imaged cells: somata inside the block, chosen at random.
	var inside []int
	for i, x := range somata {
		if x[0] >= 0 && x[1] >= 0 && x[2] >= 0 && x[0] <= pr.Size[0] && x[1] <= pr.Size[1] && x[2] <= pr.Size[2] {
			inside = append(inside, i)
		}
	}
	rng.Shuffle(len(inside), func(a, b int) { inside[a], inside[b] = inside[b], inside[a] })
	cells := inside[:min(pr.Cells, len(inside))]
	missing := map[int]bool{}
	for k, i := range cells {
		if float64(k) < pr.MissingShare*float64(len(cells)) {
			missing[i] = true
		}
	}
	// Candidates: every soma's nucleus but the missing ones, in a shuffled
	// order with ids that do not give the truth away.
	perm := rng.Perm(len(somata))
	candOf := make([]int, len(somata))
	for _, i := range perm {
		candOf[i] = -1
		if missing[i] {
			continue
		}
		y := s.Warp(somata[i])
		for k := range 3 {
			y[k] += pr.NucleusSD * rng.NormFloat64()
		}
		candOf[i] = len(s.Candidates)
		s.Candidates = append(s.Candidates, y)
		s.CandIDs = append(s.CandIDs, "n"+strconv.Itoa(len(s.CandIDs)+1))
	}
	for k, i := range cells {
		x := somata[i]
		var m transform.Vec
		for a := range 3 {
			m[a] = x[a] + pr.CellSD[a]*rng.NormFloat64()
		}
		s.Cells = append(s.Cells, m)
		s.CellTruth = append(s.CellTruth, s.Warp(x))
		s.Counterpart = append(s.Counterpart, candOf[i])
		s.CellIDs = append(s.CellIDs, fmt.Sprintf("c%04d", k+1))
	}
	// Landmarks: vessel branch points spread over the block (a jittered
	// grid, as a user spreads them), picked with noise on both sides.
	p := &register.Problem{Dim: 3}
	n := pr.Landmarks
	per := int(math.Ceil(math.Cbrt(float64(n))))
	var slots []transform.Vec
	for i := range per {
		for j := range per {
			for k := range per {
				slots = append(slots, transform.Vec{
					(float64(i) + 0.2 + 0.6*rng.Float64()) / float64(per) * pr.Size[0],
					(float64(j) + 0.2 + 0.6*rng.Float64()) / float64(per) * pr.Size[1],
					(float64(k) + 0.2 + 0.6*rng.Float64()) / float64(per) * pr.Size[2],
				})
			}
		}
	}
	rng.Shuffle(len(slots), func(a, b int) { slots[a], slots[b] = slots[b], slots[a] })
	for l := range n {
		x := slots[l]
		y := s.Warp(x)
		var src, dst transform.Vec
		for a := range 3 {
			src[a] = x[a] + pr.PickSource*rng.NormFloat64()
			dst[a] = y[a] + pr.PickTarget*rng.NormFloat64()
		}
		p.IDs = append(p.IDs, fmt.Sprintf("v%02d", l+1))
		p.Kinds = append(p.Kinds, landmarks.KindVessel)
		p.Source = append(p.Source, src)
		p.Target = append(p.Target, dst)
	}
	s.Landmarks = p
	return s
}

// makeWarp draws an affine change and a distortion of kind pr.Warp.
func makeWarp(pr scenarioParams, rng *rand.Rand) func(transform.Vec) transform.Vec {
	a := pr.Amplitude
	c := pr.Size.Scale(0.5)
	ang := (rng.Float64() - 0.5) * 0.1 // ±3°
	rot := transform.Mat{{math.Cos(ang), -math.Sin(ang), 0}, {math.Sin(ang), math.Cos(ang), 0}, {0, 0, 1}}
	shrink := transform.Mat{{0.92 + 0.04*rng.Float64(), 0, 0}, {0, 0.92 + 0.04*rng.Float64(), 0}, {0, 0, 0.85 + 0.1*rng.Float64()}}
	lin := rot.Mul(shrink)
	shift := transform.Vec{1000 + 100*rng.Float64(), 2000 + 100*rng.Float64(), 300 + 50*rng.Float64()}
	affine := func(x transform.Vec) transform.Vec { return lin.MulVec(x.Sub(c)).Add(c).Add(shift) }
	var distort func(u transform.Vec) transform.Vec // u: offsets from the centre, µm
	switch pr.Warp {
	case warpPolynomial:
		var q [3][3]float64
		for i := range 3 {
			for j := range 3 {
				q[i][j] = rng.NormFloat64()
			}
		}
		distort = func(u transform.Vec) transform.Vec {
			v := transform.Vec{u[0] / 250, u[1] / 250, u[2] / 175}
			var d transform.Vec
			for i := range 3 {
				d[i] = a * 0.6 * (q[i][0]*v[0]*v[1] + q[i][1]*v[2]*v[2] + q[i][2]*v[0]*v[0]*v[2])
			}
			return d
		}
	case warpBumps:
		type bump struct {
			at    transform.Vec
			sigma float64
			amp   transform.Vec
		}
		var bumps []bump
		for _, sigma := range []float64{30, 50, 50, 80, 80, 110} {
			b := bump{sigma: sigma}
			for k := range 3 {
				b.at[k] = (rng.Float64() - 0.5) * pr.Size[k]
				b.amp[k] = a * 1.2 * rng.NormFloat64() * 0.6
			}
			bumps = append(bumps, b)
		}
		distort = func(u transform.Vec) transform.Vec {
			var d transform.Vec
			for _, b := range bumps {
				r := u.Sub(b.at)
				d = d.Add(b.amp.Scale(math.Exp(-r.Dot(r) / (2 * b.sigma * b.sigma))))
			}
			return d
		}
	case warpCompression:
		k1 := 0.03 + 0.03*rng.Float64()
		k2 := 0.02 * rng.NormFloat64()
		distort = func(u transform.Vec) transform.Vec {
			t := u[2] / pr.Size[2] // −0.5 … 0.5
			// Deeper sections compress more, in z and a little in x, y.
			return transform.Vec{k2 * t * u[0], k2 * t * u[1], -k1 * pr.Size[2] * t * t * 2}.Scale(a / 8)
		}
	case warpShear:
		// Sections 40 µm thick, each sheared against the one before by a
		// few micrometres: the offset in x and y is a random walk over the
		// sections, continuous and linear within each.
		const thick = 40.0
		n := int(pr.Size[2]/thick) + 4
		sx, sy := make([]float64, n), make([]float64, n)
		for i := 1; i < n; i++ {
			sx[i] = sx[i-1] + a*0.3*rng.NormFloat64()
			sy[i] = sy[i-1] + a*0.3*rng.NormFloat64()
		}
		distort = func(u transform.Vec) transform.Vec {
			f := (u[2] + pr.Size[2]/2 + thick) / thick
			i := min(max(int(math.Floor(f)), 0), n-2)
			w := f - float64(i)
			return transform.Vec{sx[i]*(1-w) + sx[i+1]*w, sy[i]*(1-w) + sy[i+1]*w, 0}
		}
	default:
		panic("unknown warp " + string(pr.Warp))
	}
	return func(x transform.Vec) transform.Vec {
		return affine(x.Add(distort(x.Sub(c))))
	}
}

// gapGrid answers whether a point lies at least gap from every point added.
type gapGrid struct {
	gap   float64
	cells map[[3]int][]transform.Vec
}

func newGapGrid(gap float64) *gapGrid { return &gapGrid{gap: gap, cells: map[[3]int][]transform.Vec{}} }

func (g *gapGrid) key(x transform.Vec) [3]int {
	return [3]int{int(math.Floor(x[0] / g.gap)), int(math.Floor(x[1] / g.gap)), int(math.Floor(x[2] / g.gap))}
}

func (g *gapGrid) free(x transform.Vec) bool {
	k := g.key(x)
	for i := -1; i <= 1; i++ {
		for j := -1; j <= 1; j++ {
			for l := -1; l <= 1; l++ {
				for _, y := range g.cells[[3]int{k[0] + i, k[1] + j, k[2] + l}] {
					if x.Sub(y).Norm() < g.gap {
						return false
					}
				}
			}
		}
	}
	return true
}

func (g *gapGrid) add(x transform.Vec) { k := g.key(x); g.cells[k] = append(g.cells[k], x) }

// input is the scenario as Refine takes it.
func (s *scenario) input() Input {
	return Input{Landmarks: s.Landmarks, Somata: s.Cells, SomaIDs: s.CellIDs, Candidates: s.Candidates, CandidateIDs: s.CandIDs}
}

// scores are a mapping and a match set against the truth.
type scores struct {
	Recall, Precision  float64
	MedianUM, P95UM    float64
	Coverage           float64
	Matched, Ambiguous int
}

func (sc scores) String() string {
	return fmt.Sprintf("recall %.3f precision %.4f median %.2f µm p95 %.2f µm coverage %.3f matched %d ambiguous %d",
		sc.Recall, sc.Precision, sc.MedianUM, sc.P95UM, sc.Coverage, sc.Matched, sc.Ambiguous)
}

func quantile(v []float64, q float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	if len(s) == 0 {
		return math.NaN()
	}
	return s[min(len(s)-1, int(q*float64(len(s))))]
}
