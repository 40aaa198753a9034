package simulate

import (
	"context"
	"fmt"
	"math"
	"path/filepath"
	"sort"

	"ferry/imaging"
	"ferry/transform"
)

// The images of a scenario: a small in vivo stack and one EM-like plane, so
// that resample and overlay have something to show. They are pictures for
// the eye, drawn from the same tissue as the tables, not a model of either
// microscope's physics.
const (
	InVivoStackFile = "invivo_stack.tif"
	EMPlaneFile     = "em_plane.tif"
)

// ImageParams fix the images' grids.
type ImageParams struct {
	// SourceVoxelUM is the in vivo stack's voxel size: two-photon stacks
	// are coarse along z.
	SourceVoxelUM transform.Vec
	// TargetVoxelUM is the EM plane's pixel size (a downsampled EM
	// section) and section spacing; TargetZ is the plane's page index.
	TargetVoxelUM transform.Vec
	TargetZ       int
}

// DefaultImageParams draw the in vivo stack at 3 × 3 × 5 µm and the EM
// plane at 1 µm per pixel through the imaging plane with the most imaged
// cells inside the EM block, at their median depth there, so that the
// overlay shows the cells a user would look for.
func (s *Scenario) DefaultImageParams() ImageParams {
	z := 0.5 * (s.EMBlock.Min[2] + s.EMBlock.Max[2])
	byPlane := map[int][]float64{}
	best := -1
	for _, c := range s.Cells {
		if c.InsideEM {
			byPlane[c.Plane] = append(byPlane[c.Plane], c.TrueTargetUM[2])
			if best < 0 || len(byPlane[c.Plane]) > len(byPlane[best]) || (len(byPlane[c.Plane]) == len(byPlane[best]) && c.Plane < best) {
				best = c.Plane
			}
		}
	}
	if zs := byPlane[best]; len(zs) > 0 {
		sort.Float64s(zs)
		z = zs[len(zs)/2]
	}
	return ImageParams{
		SourceVoxelUM: transform.Vec{3, 3, 5},
		TargetVoxelUM: transform.Vec{1, 1, 1},
		TargetZ:       int(math.Round(z)),
	}
}

// WriteImages draws and writes the in vivo stack (multi-page TIFF) and the
// EM plane (a one-page TIFF) into dir, returning their paths. Both record
// their voxel size and origin (ImageJ metadata and resolution tags), the
// plane its z position, so that resample, overlay and warp need no flags.
func (s *Scenario) WriteImages(dir string, ip ImageParams) (stack, plane string, err error) {
	return s.WriteImagesContext(context.Background(), dir, ip)
}

// WriteImagesContext is WriteImages with the run's context, which carries
// its output tracker (outfile); the writes are not cut short.
func (s *Scenario) WriteImagesContext(ctx context.Context, dir string, ip ImageParams) (stack, plane string, err error) {
	st, err := s.InVivoStack(ip)
	if err != nil {
		return "", "", err
	}
	pl, err := s.EMPlane(ip)
	if err != nil {
		return "", "", err
	}
	stack, plane = filepath.Join(dir, InVivoStackFile), filepath.Join(dir, EMPlaneFile)
	if err := imaging.WriteTIFFContext(ctx, stack, st); err != nil {
		return "", "", err
	}
	if err := imaging.WriteTIFFContext(ctx, plane, pl); err != nil {
		return "", "", err
	}
	return stack, plane, nil
}

// InVivoStack draws the in vivo field: dye-filled vessels bright, somata
// faint (a calcium indicator's resting glow), on a dim, noisy background.
func (s *Scenario) InVivoStack(ip ImageParams) (*imaging.Stack, error) {
	v := ip.SourceVoxelUM
	f := s.Params.FieldUM
	w, h, d := int(f[0]/v[0])+1, int(f[1]/v[1])+1, int(f[2]/v[2])+1
	st, err := imaging.NewStack(w, h, d, 8)
	if err != nil {
		return nil, fmt.Errorf("simulate: in vivo stack: %w", err)
	}
	st.Geometry = imaging.Geometry{VoxelUM: v, HasOrigin: [3]bool{true, true, true}}
	val := make([]float64, w*h*d)
	at := func(i, j, k int) *float64 { return &val[(k*h+j)*w+i] }
	// Somata: soft balls. The in vivo z blur is several times the lateral
	// one, as a two-photon point-spread function is.
	blur := transform.Vec{1.5, 1.5, 5}
	for _, so := range s.Somata {
		ball(so.PositionUM, s.Params.SomaRadiusUM, blur, v, [3]int{w, h, d}, func(i, j, k int, a float64) {
			*at(i, j, k) = math.Max(*at(i, j, k), 0.28*a)
		})
	}
	for _, seg := range s.Vessels {
		tube(seg.Start, seg.End, seg.RadiusUM, blur, v, [3]int{w, h, d}, func(i, j, k int, a float64) {
			*at(i, j, k) = math.Max(*at(i, j, k), a)
		})
	}
	rng := stream(s.Seed, 101)
	for i := range val {
		x := 0.06 + 0.85*val[i] + 0.03*rng.NormFloat64()
		st.Data[i] = uint16(math.Round(255 * math.Max(0, math.Min(1, x))))
	}
	return st, nil
}

// EMPlane draws one EM-like section of the target: a textured grey
// neuropil, dark nuclei, and pale vessel lumens with a dark wall, outside
// the EM block nothing (black).
func (s *Scenario) EMPlane(ip ImageParams) (*imaging.Stack, error) {
	return s.emPlane(ip, 102)
}

// emPlane is EMPlane with the neuropil's noise drawn from stream noise.
func (s *Scenario) emPlane(ip ImageParams, noise uint64) (*imaging.Stack, error) {
	v := ip.TargetVoxelUM
	zt := float64(ip.TargetZ) * v[2]
	w, h := int(s.EMBlock.Max[0]/v[0])+1, int(s.EMBlock.Max[1]/v[1])+1
	st, err := imaging.NewStack(w, h, 1, 8)
	if err != nil {
		return nil, fmt.Errorf("simulate: EM plane: %w", err)
	}
	st.Geometry = imaging.Geometry{VoxelUM: v, OriginUM: transform.Vec{0, 0, zt}, HasOrigin: [3]bool{true, true, true}}
	val := make([]float64, w*h)
	rng := stream(s.Seed, noise)
	for i := range val {
		val[i] = 0.55 + 0.06*rng.NormFloat64()
	}
	flat := transform.Vec{0.3, 0.3, 0.3}
	dims := [3]int{w, h, 1}
	plane := func(p transform.Vec) transform.Vec { return transform.Vec{p[0], p[1], p[2] - zt} }
	// Nuclei: about two thirds of a soma's radius.
	for _, c := range s.Candidates {
		ball(plane(c.TargetUM), 0.65*s.Params.SomaRadiusUM, flat, v, dims, func(i, j, _ int, a float64) {
			val[j*w+i] = math.Min(val[j*w+i], 0.55-0.35*a)
		})
	}
	for _, seg := range s.Vessels {
		a, b := plane(s.TrueMap(seg.Start)), plane(s.TrueMap(seg.End))
		r := 0.9 * seg.RadiusUM
		tube(a, b, r+0.8, flat, v, dims, func(i, j, _ int, x float64) {
			val[j*w+i] = math.Min(val[j*w+i], 0.55-0.4*x)
		})
		tube(a, b, r, flat, v, dims, func(i, j, _ int, x float64) {
			val[j*w+i] = math.Max(val[j*w+i]*(1-x), 0.9*x)
		})
	}
	for j := range h {
		for i := range w {
			p := transform.Vec{float64(i) * v[0], float64(j) * v[1], zt}
			x := val[j*w+i]
			if !s.EMBlock.Contains(p) {
				x = 0
			}
			st.Data[j*w+i] = uint16(math.Round(255 * math.Max(0, math.Min(1, x))))
		}
	}
	return st, nil
}

// ball calls paint for every voxel near a soft ball of radius r around c
// (µm), with the ball's coverage a in (0, 1]; edges are smoothed over blur
// (µm per axis).
func ball(c transform.Vec, r float64, blur, vox transform.Vec, dims [3]int, paint func(i, j, k int, a float64)) {
	var lo, hi [3]int
	for k := range 3 {
		reach := r + 2*blur[k]
		lo[k] = max(0, int(math.Floor((c[k]-reach)/vox[k])))
		hi[k] = min(dims[k]-1, int(math.Ceil((c[k]+reach)/vox[k])))
	}
	for k := lo[2]; k <= hi[2]; k++ {
		for j := lo[1]; j <= hi[1]; j++ {
			for i := lo[0]; i <= hi[0]; i++ {
				p := transform.Vec{float64(i) * vox[0], float64(j) * vox[1], float64(k) * vox[2]}
				// Distance in units of the blur, so the edge is soft
				// along z by as much as the blur says.
				d := 0.0
				for a := range 3 {
					t := (p[a] - c[a]) / math.Max(1, blur[a]/blur[0])
					d += t * t
				}
				if a := edge(math.Sqrt(d)-r, blur[0]); a > 0.01 {
					paint(i, j, k, a)
				}
			}
		}
	}
}

// tube is ball for a cylinder of radius r around the segment a–b.
func tube(a, b transform.Vec, r float64, blur, vox transform.Vec, dims [3]int, paint func(i, j, k int, x float64)) {
	var lo, hi [3]int
	for k := range 3 {
		reach := r + 2*blur[k]
		lo[k] = max(0, int(math.Floor((math.Min(a[k], b[k])-reach)/vox[k])))
		hi[k] = min(dims[k]-1, int(math.Ceil((math.Max(a[k], b[k])+reach)/vox[k])))
	}
	ab := b.Sub(a)
	l2 := ab.Dot(ab)
	for k := lo[2]; k <= hi[2]; k++ {
		for j := lo[1]; j <= hi[1]; j++ {
			for i := lo[0]; i <= hi[0]; i++ {
				p := transform.Vec{float64(i) * vox[0], float64(j) * vox[1], float64(k) * vox[2]}
				t := 0.0
				if l2 > 0 {
					t = math.Max(0, math.Min(1, p.Sub(a).Dot(ab)/l2))
				}
				q := p.Sub(a.Add(ab.Scale(t)))
				d := 0.0
				for x := range 3 {
					s := q[x] / math.Max(1, blur[x]/blur[0])
					d += s * s
				}
				if x := edge(math.Sqrt(d)-r, blur[0]); x > 0.01 {
					paint(i, j, k, x)
				}
			}
		}
	}
}

// edge is a smooth step from 1 inside (d < 0) to 0 outside over width w.
func edge(d, w float64) float64 { return 0.5 * math.Erfc(d/(w*math.Sqrt2)) }

// EMStack draws the EM block as a stack of sections, page k at target
// depth k·ip.TargetVoxelUM[2], each as EMPlane draws it but with noise of
// its own (the same noise on every page would draw stripes across the
// sections): the EM export a user would review matches against.
func (s *Scenario) EMStack(ip ImageParams) (*imaging.Stack, error) {
	v := ip.TargetVoxelUM
	depth := int(s.EMBlock.Max[2]/v[2]) + 1
	var st *imaging.Stack
	for k := range depth {
		ip.TargetZ = k
		pl, err := s.emPlane(ip, 1000+uint64(k))
		if err != nil {
			return nil, err
		}
		if st == nil {
			if st, err = imaging.NewStack(pl.Width, pl.Height, depth, 8); err != nil {
				return nil, fmt.Errorf("simulate: EM stack: %w", err)
			}
		}
		copy(st.PageData(k), pl.Data)
	}
	// Page k lies at k·vz and pixel (i, j) at (i·vx, j·vy): the stack
	// records it, as the other rendered images do, so that review finds
	// the voxel size without flags.
	st.Geometry = imaging.Geometry{VoxelUM: v, HasOrigin: [3]bool{true, true, true}}
	return st, nil
}
