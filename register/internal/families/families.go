package families

import (
	"fmt"
	"hash/fnv"
	"math"
	"math/rand/v2"

	"ferry/landmarks"
	"ferry/transform"
)

// Block is the in vivo volume the landmarks are drawn in (µm).
var Block = transform.Vec{500, 500, 350}

// Warp names one kind of deformation on top of the global affine map.
type Warp string

// The warp kinds.
const (
	// Smooth is a low-order polynomial displacement of about 8 µm over the
	// block.
	Smooth Warp = "poly"
	// Bumps are several local Gaussian displacements of about 10 µm with
	// a width (sd) of about 100 µm, as uneven shrinkage leaves them.
	Bumps Warp = "bumps"
	// SmallBumps are more, narrower bumps: 6 µm over 60 µm.
	SmallBumps Warp = "small-bumps"
	// WideBumps are fewer, wider bumps: 15 µm over 160 µm.
	WideBumps Warp = "wide-bumps"
	// Compression is a section compression that grows with depth.
	Compression Warp = "compression"
	// Shear shifts the sections sideways by an amount that wanders with
	// depth, as sections cut and stacked one by one do.
	Shear Warp = "shear"
)

// Noise is the picking noise, one standard deviation per axis (µm), of
// each side and kind.
type Noise struct {
	Name                     string
	SourceVessel, SourceSoma transform.Vec
	TargetVessel, TargetSoma transform.Vec
}

// The noise levels: none, low, and realistic, in vivo z three to five times
// worse than x and y, somata (centroids of a cell body) worse than vessel
// branch points.
var (
	NoNoise   = Noise{Name: "none"}
	LowNoise  = Noise{Name: "low", SourceVessel: transform.Vec{0.3, 0.3, 1}, SourceSoma: transform.Vec{0.5, 0.5, 1.5}, TargetVessel: transform.Vec{0.2, 0.2, 0.3}, TargetSoma: transform.Vec{0.3, 0.3, 0.4}}
	RealNoise = Noise{Name: "realistic", SourceVessel: transform.Vec{0.8, 0.8, 3}, SourceSoma: transform.Vec{1.2, 1.2, 5}, TargetVessel: transform.Vec{0.3, 0.3, 0.5}, TargetSoma: transform.Vec{0.5, 0.5, 0.8}}
)

// Mistake kinds.
const (
	WrongCorrespondence = "correspondence" // the target is another structure 40–60 µm away
	WrongSection        = "section"        // the target is ~20 µm off in z
)

// Spec describes one scenario.
type Spec struct {
	Name  string
	Warps []Warp
	N     int
	Noise Noise
	// Mirror flips the source x axis; Rotate is the rotation about z
	// (degrees).
	Mirror bool
	Rotate float64
	// Mistakes are planted in order; with two, the second sits on the
	// nearest neighbour of the first, where the first masks it.
	Mistakes []string
	// SomaShare is the share of soma landmarks (the rest are vessels).
	SomaShare float64
	// Cells is how many held-out cells to draw; 0 means 400.
	Cells int
}

// Cell is one held-out cell: its observed in vivo position (µm, with the
// picking noise of a soma), its true in vivo position and its true
// position in the target.
type Cell struct {
	Source, TrueSource, Truth transform.Vec
}

// Scenario is a drawn landmark set with its truth.
type Scenario struct {
	Spec Spec
	Seed uint64
	IDs  []string
	Kind []landmarks.Kind
	// Source and Target are the picks (µm) as a user would give them.
	Source, Target []transform.Vec
	// Wrong marks the planted mistakes; Mistake names each one's kind
	// (WrongCorrespondence or WrongSection, "" for a good landmark).
	Wrong   []bool
	Mistake []string
	Cells   []Cell
	truth   func(transform.Vec) transform.Vec
}

// Truth maps a true source position to its true target position.
func (s *Scenario) Truth(x transform.Vec) transform.Vec { return s.truth(x) }

// WrongIDs are the indices of the planted mistakes.
func (s *Scenario) WrongIDs() []int {
	var out []int
	for i, w := range s.Wrong {
		if w {
			out = append(out, i)
		}
	}
	return out
}

// Draw draws the scenario of spec with seed.
func Draw(spec Spec, seed uint64) *Scenario {
	// Each scenario its own stream: the name hashed, so that no two
	// scenarios share their draws.
	h := fnv.New64a()
	h.Write([]byte(spec.Name))
	rng := rand.New(rand.NewPCG(seed, h.Sum64()))
	s := &Scenario{Spec: spec, Seed: seed}
	s.truth = truthOf(spec, rng)
	for i := range spec.N {
		x := transform.Vec{rng.Float64() * Block[0], rng.Float64() * Block[1], rng.Float64() * Block[2]}
		kind := landmarks.KindVessel
		sdS, sdT := spec.Noise.SourceVessel, spec.Noise.TargetVessel
		if rng.Float64() < spec.SomaShare {
			kind = landmarks.KindSoma
			sdS, sdT = spec.Noise.SourceSoma, spec.Noise.TargetSoma
		}
		y := s.truth(x)
		src := x
		for k := range 3 {
			src[k] += rng.NormFloat64() * sdS[k]
			y[k] += rng.NormFloat64() * sdT[k]
		}
		s.IDs = append(s.IDs, fmt.Sprintf("L%03d", i+1))
		s.Kind = append(s.Kind, kind)
		s.Source = append(s.Source, src)
		s.Target = append(s.Target, y)
		s.Wrong = append(s.Wrong, false)
		s.Mistake = append(s.Mistake, "")
	}
	first := -1
	for _, m := range spec.Mistakes {
		i := rng.IntN(spec.N)
		if first >= 0 {
			i = nearest(s.Source, first)
		}
		for s.Wrong[i] {
			i = rng.IntN(spec.N)
		}
		switch m {
		case WrongCorrespondence:
			// Another structure 40–60 µm away in the section plane.
			a := rng.Float64() * 2 * math.Pi
			d := 40 + 20*rng.Float64()
			s.Target[i][0] += d * math.Cos(a)
			s.Target[i][1] += d * math.Sin(a)
		case WrongSection:
			d := 20.0
			if rng.IntN(2) == 0 {
				d = -d
			}
			s.Target[i][2] += d
		default:
			panic("families: unknown mistake " + m)
		}
		s.Wrong[i] = true
		s.Mistake[i] = m
		if first < 0 {
			first = i
		}
	}
	nc := spec.Cells
	if nc == 0 {
		nc = 400
	}
	// Cells over a box a little larger than the landmarks' so that some
	// lie beyond their hull, as cells at the edge of a field of view do.
	const margin = 40
	for range nc {
		x := transform.Vec{-margin + rng.Float64()*(Block[0]+2*margin), -margin + rng.Float64()*(Block[1]+2*margin), -margin/2 + rng.Float64()*(Block[2]+margin)}
		src := x
		for k := range 3 {
			src[k] += rng.NormFloat64() * spec.Noise.SourceSoma[k]
		}
		s.Cells = append(s.Cells, Cell{Source: src, TrueSource: x, Truth: s.truth(x)})
	}
	return s
}

func nearest(pts []transform.Vec, i int) int {
	best, bd := -1, math.Inf(1)
	for j, p := range pts {
		if j != i {
			if d := p.Sub(pts[i]).Norm(); d < bd {
				best, bd = j, d
			}
		}
	}
	return best
}

// bump is one Gaussian displacement.
type bump struct {
	centre, disp transform.Vec
	width        float64
}

// truthOf draws the true map of a scenario: the warps in source
// coordinates, then a shrinking, optionally mirrored and rotated affine map
// into EM coordinates far from the origin.
func truthOf(spec Spec, rng *rand.Rand) func(transform.Vec) transform.Vec {
	var bumps []bump
	var poly [3][10]float64
	var shearX, shearY [8]float64
	compress := 0.0
	for _, w := range spec.Warps {
		switch w {
		case Bumps, SmallBumps, WideBumps:
			n, amp, width := 6, 10.0, 100.0
			if w == SmallBumps {
				n, amp, width = 10, 6, 60
			}
			if w == WideBumps {
				n, amp, width = 3, 15, 160
			}
			for range n {
				c := transform.Vec{rng.Float64() * Block[0], rng.Float64() * Block[1], rng.Float64() * Block[2]}
				d := transform.Vec{rng.NormFloat64(), rng.NormFloat64(), 0.5 * rng.NormFloat64()}
				d = d.Scale(amp * (0.7 + 0.6*rng.Float64()) / d.Norm())
				bumps = append(bumps, bump{centre: c, disp: d, width: width * (0.8 + 0.4*rng.Float64())})
			}
		case Smooth:
			for k := range 3 {
				for j := range poly[k] {
					poly[k][j] = rng.NormFloat64() * 3
				}
			}
		case Compression:
			compress = 0.08 + 0.06*rng.Float64()
		case Shear:
			for j := range shearX {
				shearX[j] = rng.NormFloat64() * 3
				shearY[j] = rng.NormFloat64() * 3
			}
		default:
			panic("families: unknown warp " + string(w))
		}
	}
	theta := spec.Rotate * math.Pi / 180
	c, sn := math.Cos(theta), math.Sin(theta)
	mirror := 1.0
	if spec.Mirror {
		mirror = -1
	}
	return func(x transform.Vec) transform.Vec {
		// Unit coordinates over the block for the polynomial.
		u := [3]float64{2*x[0]/Block[0] - 1, 2*x[1]/Block[1] - 1, 2*x[2]/Block[2] - 1}
		var d transform.Vec
		for k := range 3 {
			p := poly[k]
			d[k] += p[0]*u[0]*u[0] + p[1]*u[1]*u[1] + p[2]*u[2]*u[2] + p[3]*u[0]*u[1] + p[4]*u[1]*u[2] + p[5]*u[0]*u[2] +
				p[6]*u[0]*u[0]*u[1] + p[7]*u[1]*u[1]*u[2] + p[8]*u[2]*u[2]*u[0] + p[9]*u[0]*u[1]*u[2]
		}
		for _, b := range bumps {
			r2 := x.Sub(b.centre).Dot(x.Sub(b.centre))
			d = d.Add(b.disp.Scale(math.Exp(-r2 / (2 * b.width * b.width))))
		}
		// Sideways shifts that wander smoothly with depth.
		for j := range shearX {
			f := math.Sin(float64(j+1) * math.Pi * x[2] / Block[2] / 2)
			d[0] += shearX[j] * f / float64(j+1)
			d[1] += shearY[j] * f / float64(j+1)
		}
		// Compression: the depth scale falls from 1 at the top to 1 −
		// compress at the bottom.
		d[2] -= compress * x[2] * x[2] / (2 * Block[2])
		w := x.Add(d)
		w[0] *= mirror
		y := transform.Vec{
			0.9 * (c*w[0] - sn*w[1]),
			0.9 * (sn*w[0] + c*w[1]),
			0.8 * w[2],
		}
		return y.Add(transform.Vec{21000, 14000, 3000})
	}
}
