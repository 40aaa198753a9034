package simulate

import (
	"math"
	"math/rand/v2"

	"ferry/transform"
)

// Segment is one straight, round piece of vessel in source space, for
// rendering: a cylinder of RadiusUM around Start–End.
type Segment struct {
	Start, End transform.Vec
	RadiusUM   float64
	// Vessel is the index of the penetrating vessel it belongs to; Order
	// is 0 on the trunk and grows by one at each side branch.
	Vessel, Order int
}

// BranchPoint is where a side branch leaves its parent: a vessel landmark
// candidate.
type BranchPoint struct {
	// PositionUM is the true source position.
	PositionUM transform.Vec
	// RadiusUM is the parent's radius there: thick vessels are the ones a
	// user finds in both images.
	RadiusUM      float64
	Vessel, Order int
}

// maxSegments bounds the whole tree so that no choice of knobs can make
// generation run away; far above what the default tree needs.
const maxSegments = 20000

// sprout is a vessel end still growing; grown counts its segments so far.
type sprout struct {
	at, dir       transform.Vec
	radius        float64
	order, vessel int
	grown         int
}

// growVessels grows the penetrating vessels from the pia, depth first.
// Each segment bends a little; at its end a side branch may leave at an
// angle drawn from BranchAngleDeg. The radii at a branch obey Murray's law,
// r_parent³ = r_main³ + r_side³ (Murray 1926, Proc. Natl. Acad. Sci. USA
// 12:207–214), with the side branch the thinner one, down to the capillary
// radius, which the capillaries keep. A side branch ends after
// MaxSideSegments segments, and any branch where it would leave the field.
// A side branch whose first segment would leave the field is not made, so
// that every branch point has three vessels meeting at it.
func growVessels(p Params, rng *rand.Rand) ([]Segment, []BranchPoint) {
	field := p.FieldUM
	var segments []Segment
	var branches []BranchPoint

	// Roots spread over the pia, away from the edges of the field.
	margin := transform.Vec{0.1 * field[0], 0.1 * field[1], 0}
	spacing := 0.5 * math.Sqrt(field[0]*field[1]/float64(max(p.Vessels, 1)))
	var roots []transform.Vec
	for attempt := 0; len(roots) < p.Vessels; attempt++ {
		at := transform.Vec{
			margin[0] + rng.Float64()*(field[0]-2*margin[0]),
			margin[1] + rng.Float64()*(field[1]-2*margin[1]),
			0,
		}
		ok := true
		for _, r := range roots {
			if r.Sub(at).Norm() < spacing {
				ok = false
				break
			}
		}
		// After many misses the spacing is given up rather than looping:
		// crowded roots are still vessels.
		if ok || attempt > 1000 {
			roots = append(roots, at)
		}
	}

	var stack []sprout
	for v := len(roots) - 1; v >= 0; v-- {
		dir := normalise(transform.Vec{0.15 * rng.NormFloat64(), 0.15 * rng.NormFloat64(), 1})
		radius := p.VesselRootRadiusUM[0] + rng.Float64()*(p.VesselRootRadiusUM[1]-p.VesselRootRadiusUM[0])
		stack = append(stack, sprout{at: roots[v], dir: dir, radius: radius, order: 0, vessel: v})
	}
	inField := func(q transform.Vec) bool {
		return q[0] >= 0 && q[0] <= field[0] && q[1] >= 0 && q[1] <= field[1] && q[2] >= 0 && q[2] <= field[2]
	}
	// step grows s by one segment, or reports that it would leave the field.
	step := func(s *sprout) bool {
		// Bend: the trunk keeps descending, side branches wander.
		wiggle := 0.2
		if s.order == 0 {
			wiggle = 0.12
		}
		dir := s.dir.Add(transform.Vec{wiggle * rng.NormFloat64(), wiggle * rng.NormFloat64(), wiggle * rng.NormFloat64()})
		if s.order == 0 {
			dir = dir.Add(transform.Vec{0, 0, 0.3})
		}
		dir = normalise(dir)
		length := p.SegmentLengthUM[0] + rng.Float64()*(p.SegmentLengthUM[1]-p.SegmentLengthUM[0])
		end := s.at.Add(dir.Scale(length))
		if !inField(end) {
			return false
		}
		segments = append(segments, Segment{Start: s.at, End: end, RadiusUM: s.radius, Vessel: s.vessel, Order: s.order})
		s.at, s.dir = end, dir
		s.grown++
		return true
	}
	for len(stack) > 0 && len(segments) < maxSegments {
		s := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		for len(segments) < maxSegments {
			if s.order > 0 && s.grown >= p.MaxSideSegments {
				break
			}
			if !step(&s) {
				break
			}
			s.radius = math.Max(0.98*s.radius, p.CapillaryRadiusUM) // a slow taper
			if s.order >= p.MaxBranchOrder || rng.Float64() >= p.BranchProbability {
				continue
			}
			ratio := 0.55 + 0.25*rng.Float64()
			angle := (p.BranchAngleDeg[0] + rng.Float64()*(p.BranchAngleDeg[1]-p.BranchAngleDeg[0])) * math.Pi / 180
			side := sprout{at: s.at, dir: turn(s.dir, angle, rng), order: s.order + 1, vessel: s.vessel}
			side.radius = math.Max(s.radius*ratio, p.CapillaryRadiusUM)
			if !step(&side) {
				continue
			}
			branches = append(branches, BranchPoint{PositionUM: s.at, RadiusUM: s.radius, Vessel: s.vessel, Order: s.order})
			stack = append(stack, side)
			s.radius = math.Max(math.Cbrt(s.radius*s.radius*s.radius-side.radius*side.radius*side.radius), p.CapillaryRadiusUM)
		}
	}
	return segments, branches
}

// turn rotates the unit vector d by angle about a random axis
// perpendicular to it.
func turn(d transform.Vec, angle float64, rng *rand.Rand) transform.Vec {
	// Any vector not parallel to d gives a perpendicular by Gram–Schmidt.
	var perp transform.Vec
	for {
		r := unitVector(rng)
		perp = r.Sub(d.Scale(r.Dot(d)))
		if perp.Norm() > 1e-3 {
			break
		}
	}
	perp = normalise(perp)
	s, c := math.Sincos(angle)
	return normalise(d.Scale(c).Add(perp.Scale(s)))
}

func normalise(v transform.Vec) transform.Vec {
	n := v.Norm()
	if n == 0 {
		return transform.Vec{0, 0, 1}
	}
	return v.Scale(1 / n)
}

// segmentLengths is the cumulative length of the segments, for drawing a
// point uniformly along the tree.
func segmentLengths(segments []Segment) []float64 {
	cum := make([]float64, len(segments))
	total := 0.0
	for i, s := range segments {
		total += s.End.Sub(s.Start).Norm()
		cum[i] = total
	}
	return cum
}
