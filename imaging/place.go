package imaging

import (
	"fmt"
	"math"
	"strconv"

	"ferry/internal/remedy"
	"ferry/transform"
)

// Given is what a user or a transform file says about a stack's geometry,
// beside what the stack's file records.
type Given struct {
	// Voxel and Origin are the values of flags (µm), nil when not given;
	// VoxelFlag and OriginFlag name the flags for messages.
	Voxel, Origin         *transform.Vec
	VoxelFlag, OriginFlag string
	// Fallback is the voxel size the transform file records for the
	// stack's side (the units its landmarks were picked in), nil when it
	// records none.
	Fallback *transform.Vec
}

// Settle decides the geometry of stack s: a flag's value first, then what
// the file records (Stack.Geometry), then the transform file's voxel size.
// It refuses, naming the flag to give, when none of them knows the voxel
// size. A single plane may lack the section spacing: PlaneGrid asks for it
// only when a page index needs it.
func Settle(s *Stack, in Given) (Geometry, error) {
	rec := s.Geometry
	g := Geometry{OriginUM: rec.OriginUM, HasOrigin: rec.HasOrigin}
	switch {
	case in.Voxel != nil:
		if err := checkVoxel(*in.Voxel); err != nil {
			return g, fmt.Errorf("%s: %w", in.VoxelFlag, err)
		}
		g.VoxelUM, g.From = *in.Voxel, in.VoxelFlag
		if rec.From != "" {
			// The origin the file records is in its own voxels' terms;
			// a user who corrects the voxel size keeps the origin in
			// pixels, as ImageJ would.
			for a := range 3 {
				if rec.VoxelUM[a] > 0 {
					g.OriginUM[a] = rec.OriginUM[a] / rec.VoxelUM[a] * g.VoxelUM[a]
				}
			}
		}
	case rec.HasVoxel():
		g.VoxelUM, g.From = rec.VoxelUM, rec.From
	case rec.VoxelUM[0] > 0 && rec.VoxelUM[1] > 0 && in.Fallback != nil:
		g.VoxelUM = transform.Vec{rec.VoxelUM[0], rec.VoxelUM[1], in.Fallback[2]}
		g.From = rec.From + " and the transform file"
	case rec.VoxelUM[0] > 0 && rec.VoxelUM[1] > 0 && s.Depth == 1:
		g.VoxelUM, g.From = rec.VoxelUM, rec.From
	case in.Fallback != nil:
		g.VoxelUM, g.From = *in.Fallback, "the transform file"
	case rec.VoxelUM[0] > 0:
		return g, fmt.Errorf("%s records a pixel size of %s × %s µm (%s) but no section spacing; give all three sides with %s X,Y,Z in µm",
			s.name(), num(rec.VoxelUM[0]), num(rec.VoxelUM[1]), rec.From, in.VoxelFlag)
	default:
		return g, fmt.Errorf("%s records no voxel size (no ImageJ metadata or TIFF resolution tags in a unit of length) and the transform file records none for its side; give it with %s X,Y,Z in µm",
			s.name(), in.VoxelFlag)
	}
	if in.Origin != nil {
		g.OriginUM, g.HasOrigin = *in.Origin, [3]bool{true, true, true}
		if !in.Origin.IsFinite() {
			return g, fmt.Errorf("%s: want finite µm", in.OriginFlag)
		}
	}
	return g, nil
}

// Describe is the geometry in a few words, for a command's printout.
func (g Geometry) Describe() string {
	v := g.VoxelUM
	s := fmt.Sprintf("voxels %s × %s × %s µm", num(v[0]), num(v[1]), num(v[2]))
	if v[2] == 0 {
		s = fmt.Sprintf("pixels %s × %s µm", num(v[0]), num(v[1]))
	}
	if g.From != "" {
		// No parentheses: the commands put the whole description in some.
		s += " from " + g.From
	}
	if o := g.OriginUM; o != (transform.Vec{}) {
		s += fmt.Sprintf(", voxel (0, 0, 0) at (%s, %s, %s) µm", num(o[0]), num(o[1]), num(o[2]))
	}
	return s
}

// The inputs that messages about placing or warping an output ask to
// change, in those messages' words; read only, never assigned.
var (
	targetPage  = remedy.Ref{Input: remedy.TargetPage, Words: "target page"}
	thePage     = remedy.Ref{Input: remedy.TargetPage, Words: "the target page"}
	pageIndex   = remedy.Ref{Input: remedy.TargetPage, Words: "the page index"}
	targetVoxel = remedy.Ref{Input: remedy.TargetVoxel, Words: "the target voxel size", Form: "X,Y,Z"}
	outputBox   = remedy.Ref{Input: remedy.OutputBox, Words: "output box"}
	theBox      = remedy.Ref{Input: remedy.OutputBox, Words: "the output box"}
	outputVoxel = remedy.Ref{Input: remedy.OutputVoxel, Words: "output voxel size"}
)

// num formats a length for a message.
func num(v float64) string { return strconv.FormatFloat(v, 'g', 6, 64) }

// PlaneGrid is the grid of the plane of like (a plane or a stack, whose
// geometry is g) that a command fills, chosen by targetZ (a voxel index
// along z of like's space, nil when not given), and the page of like it
// shows.
//
// A stack's pages, and a plane whose file records its z position, lie at
// fixed indices: targetZ must name one of them, and a plane's own index is
// the default. A plane that records no z position is put at targetZ
// (default 0), as docs/usage.md says of --target-z.
func PlaneGrid(like *Stack, g Geometry, targetZ *int) (Grid, int, error) {
	grid := Grid{Width: like.Width, Height: like.Height, Voxel: g.VoxelUM,
		Origin: transform.Vec{g.OriginUM[0], g.OriginUM[1], 0}}
	vz := g.VoxelUM[2]
	if targetZ != nil && *targetZ < 0 {
		return grid, 0, remedy.Errorf("%s %d is negative: want a page index ≥ 0", targetPage, *targetZ)
	}
	if like.Depth == 1 && !g.HasOrigin[2] {
		if targetZ != nil {
			if !(vz > 0) {
				return grid, 0, remedy.Errorf("%s %d: %s records no section spacing to place page %d at; give %s in µm", targetPage, *targetZ, like.name(), *targetZ, targetVoxel)
			}
			grid.Z = *targetZ
		}
		return grid, 0, nil
	}
	grid.Origin[2] = g.OriginUM[2]
	if targetZ == nil {
		return grid, 0, nil
	}
	if !(vz > 0) {
		return grid, 0, remedy.Errorf("%s %d: %s records its z position (%s µm) but no section spacing to count pages in; leave %s out or give %s in µm",
			targetPage, *targetZ, like.name(), num(g.OriginUM[2]), thePage, targetVoxel)
	}
	first := g.OriginUM[2] / vz
	page := float64(*targetZ) - first
	k := int(math.Round(page))
	if math.Abs(page-float64(k)) > 1e-6 || k < 0 || k >= like.Depth {
		if like.Depth == 1 {
			return grid, 0, remedy.Errorf("%s %d: %s is the section at page %s (z = %s µm, %s µm sections), not page %d; leave %s out or give the image of page %d",
				targetPage, *targetZ, like.name(), num(first), num(g.OriginUM[2]), num(vz), *targetZ, thePage, *targetZ)
		}
		// Pages are counted in the volume, from z = 0, not in the file:
		// say so where the two differ, or "pages 1 to 69" of a 69-page
		// file reads as a mistake.
		var counted remedy.Message
		if first != 0 {
			counted = remedy.Sprintf("; %s counts %s µm sections from z = 0, so the file's first page is page %s", pageIndex, num(vz), num(first))
		}
		return grid, 0, remedy.Errorf("%s %d is outside %s, which holds pages %s to %s (z = %s to %s µm%s)",
			targetPage, *targetZ, like.name(), num(first), num(first+float64(like.Depth-1)), num(g.OriginUM[2]), num(g.OriginUM[2]+float64(like.Depth-1)*vz), counted)
	}
	grid.Origin[2] += float64(k) * vz
	return grid, k, nil
}

// MappedBox is the box that a stack of the given size and geometry covers
// (from half a voxel before its first voxel centre to half a voxel after
// its last) mapped through t (inverse: through t's inverse), as the bounding
// box of its mapped surface sampled on a 17 × 17 grid a face. A map without
// folds carries the box's surface onto the surface of its image, so the
// image's extremes lie on the mapped surface; between the samples a smooth
// map bulges by a small fraction of a sample spacing. ok is false when no
// point could be mapped.
func MappedBox(t transform.Transform, width, height, depth int, g Geometry, inverse bool) (lo, hi transform.Vec, ok bool) {
	mapPoint := func(p transform.Vec) (transform.Vec, bool) {
		if inverse {
			q, err := t.Invert(p)
			return q, err == nil && q.IsFinite()
		}
		q := t.Apply(p)
		return q, q.IsFinite()
	}
	n := [3]int{width, height, depth}
	var b0, b1 transform.Vec
	for a := range 3 {
		b0[a] = g.OriginUM[a] - 0.5*g.VoxelUM[a]
		b1[a] = g.OriginUM[a] + (float64(n[a])-0.5)*g.VoxelUM[a]
	}
	lo = transform.Vec{math.Inf(1), math.Inf(1), math.Inf(1)}
	hi = transform.Vec{math.Inf(-1), math.Inf(-1), math.Inf(-1)}
	const steps = 16
	for a := range 3 {
		b, c := (a+1)%3, (a+2)%3
		for _, side := range [2]float64{b0[a], b1[a]} {
			for u := range steps + 1 {
				for v := range steps + 1 {
					var p transform.Vec
					p[a] = side
					p[b] = b0[b] + (b1[b]-b0[b])*float64(u)/steps
					p[c] = b0[c] + (b1[c]-b0[c])*float64(v)/steps
					q, good := mapPoint(p)
					if !good {
						continue
					}
					ok = true
					for x := range 3 {
						lo[x], hi[x] = math.Min(lo[x], q[x]), math.Max(hi[x], q[x])
					}
				}
			}
		}
	}
	return lo, hi, ok
}

// NoOverlap is the error for a plane (the file out) that the stack does
// not reach at all: rather than a blank image, the user learns where the
// stack maps and where the plane lies, µm in the plane's space, and that
// the plane's page is among the inputs to check.
func NoOverlap(stack *Stack, g Geometry, t transform.Transform, inverse bool, out string, outLo, outHi transform.Vec) error {
	return noOverlap(stack, g, t, inverse, out, thePage, outLo, outHi)
}

// noOverlap is NoOverlap for an output named by out (a file name or a
// Ref) and placed by the input placed: a warp's output box, or the page
// of resample's and overlay's plane.
func noOverlap(stack *Stack, g Geometry, t transform.Transform, inverse bool, out any, placed remedy.Ref, outLo, outHi transform.Vec) error {
	lo, hi, ok := MappedBox(t, stack.Width, stack.Height, stack.Depth, g, inverse)
	where := "nowhere the transform can map"
	if ok {
		where = "x " + span(lo[0], hi[0]) + ", y " + span(lo[1], hi[1]) + ", z " + span(lo[2], hi[2]) + " µm"
	}
	return remedy.Errorf("%s (%s) does not reach %s: the stack maps to %s, %s covers x %s, y %s, z %s µm; check the voxel sizes, %s and the transform",
		stack.name(), g.Describe(), out, where, out, span(outLo[0], outHi[0]), span(outLo[1], outHi[1]), span(outLo[2], outHi[2]), placed)
}

func span(a, b float64) string {
	return strconv.FormatFloat(a, 'f', 1, 64) + "–" + strconv.FormatFloat(b, 'f', 1, 64)
}
