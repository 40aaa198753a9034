package imaging

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"

	"ferry/internal/parallel"
	"ferry/internal/remedy"
	"ferry/outfile"
	"ferry/progress"
	"ferry/transform"
)

// WarpOptions steer Warp.
type WarpOptions struct {
	// VoxelUM is the output voxel size, µm.
	VoxelUM transform.Vec
	// Bounds, when not nil, is the output box [lo, hi] in µm of the output
	// space: voxel (0, 0, 0) sits at lo and voxel (i, j, k) at
	// lo + (i·VoxelUM[0], j·VoxelUM[1], k·VoxelUM[2]), as many as fit up to
	// hi. Nil means the stack's box mapped through the transform
	// (MappedBox), widened outwards to whole multiples of the voxel size.
	Bounds *[2]transform.Vec
	// Inverse warps a stack of the transform's target space back into its
	// source space.
	Inverse bool
	// ToleranceUM and Exact are as for Resample.
	ToleranceUM float64
	Exact       bool
	// MemoryBytes bounds the decoded input pages held at once; zero means
	// DefaultWarpMemory.
	MemoryBytes int64
}

// DefaultWarpMemory is the decoded input held at once unless told
// otherwise: enough for the pages any one stretch of 64 output rows needs
// in every realistic registration, small beside a laptop's memory.
const DefaultWarpMemory = 1 << 30

// WarpGrid is the output of a warp: Size voxels of VoxelUM µm, voxel
// (0, 0, 0) at OriginUM in the output space.
type WarpGrid struct {
	Size     [3]int
	VoxelUM  transform.Vec
	OriginUM transform.Vec
}

// Geometry is the grid's geometry, as written into the output file.
func (g WarpGrid) Geometry() Geometry {
	return Geometry{VoxelUM: g.VoxelUM, OriginUM: g.OriginUM, HasOrigin: [3]bool{true, true, true}}
}

// Voxels is the number of output voxels.
func (g WarpGrid) Voxels() int64 { return int64(g.Size[0]) * int64(g.Size[1]) * int64(g.Size[2]) }

// PlanWarp decides the output grid of a warp of a stack of the given size
// and geometry, and refuses a grid that cannot be written: more voxels than
// an int addresses, or more than the 4 GiB a classic TIFF holds.
func PlanWarp(t transform.Transform, h *Stack, g Geometry, opt WarpOptions) (WarpGrid, error) {
	var grid WarpGrid
	if t == nil || t.Dim() != 3 {
		return grid, fmt.Errorf("imaging: warp: want a 3-D transform")
	}
	if err := checkVoxel(opt.VoxelUM); err != nil {
		return grid, fmt.Errorf("imaging: warp: output voxel size of %w", err)
	}
	if err := checkVoxel(g.VoxelUM); err != nil {
		return grid, fmt.Errorf("imaging: warp: voxel size of %s: %w", h.name(), err)
	}
	grid.VoxelUM = opt.VoxelUM
	var lo, hi transform.Vec
	if opt.Bounds != nil {
		lo, hi = opt.Bounds[0], opt.Bounds[1]
		for a := range 3 {
			if !(hi[a] >= lo[a]) || math.IsInf(lo[a], 0) || math.IsInf(hi[a], 0) {
				return grid, fmt.Errorf("imaging: warp: output box: %s from %g to %g µm: want finite numbers with the lower corner below the upper", "xyz"[a:a+1], lo[a], hi[a])
			}
		}
	} else {
		var ok bool
		lo, hi, ok = MappedBox(t, h.Width, h.Height, h.Depth, g, opt.Inverse)
		if !ok {
			return grid, remedy.Errorf("imaging: warp: no point of %s's box could be mapped; give %s", h.name(), remedy.Ref{Input: remedy.OutputBox, Words: "an output box"})
		}
		for a := range 3 {
			lo[a] = math.Floor(lo[a]/opt.VoxelUM[a]) * opt.VoxelUM[a]
			hi[a] = math.Ceil(hi[a]/opt.VoxelUM[a]) * opt.VoxelUM[a]
		}
	}
	if opt.Bounds != nil {
		// An output the stack cannot reach would be a file of zeros.
		mlo, mhi, ok := MappedBox(t, h.Width, h.Height, h.Depth, g, opt.Inverse)
		if ok && (mlo[0] > hi[0] || mhi[0] < lo[0] || mlo[1] > hi[1] || mhi[1] < lo[1] || mlo[2] > hi[2] || mhi[2] < lo[2]) {
			return grid, noOverlap(h, g, t, opt.Inverse, theBox, theBox, lo, hi)
		}
	}
	grid.OriginUM = lo
	for a := range 3 {
		n := math.Floor((hi[a]-lo[a])/opt.VoxelUM[a]+1e-9) + 1
		if n > 1<<24 {
			return grid, remedy.Errorf("imaging: warp: %.0f voxels along %s: at most 16777216; choose a coarser %s or smaller %s", n, "xyz"[a:a+1], outputVoxel, outputBox)
		}
		grid.Size[a] = int(n)
	}
	if _, err := voxelCount(grid.Size[0], grid.Size[1], grid.Size[2]); err != nil {
		return grid, remedy.Errorf("imaging: warp: output of %w; choose a coarser %s or smaller %s", err, outputVoxel, outputBox)
	}
	return grid, nil
}

// WarpReport counts what happened to the output voxels.
type WarpReport struct {
	ResampleReport
	// PagesRead counts the input pages decoded, some more than once when
	// the memory bound made the warp drop them; MostPagesHeld is the most
	// held at once.
	PagesRead, MostPagesHeld int
}

// Layout is the TIFF the warp writes, for checks before it starts.
func (g WarpGrid) layout(bits int) tiffLayout {
	return tiffLayout{width: g.Size[0], height: g.Size[1], depth: g.Size[2], bits: bits, geometry: g.Geometry()}
}

// FileBytes is the size of the output file.
func (g WarpGrid) FileBytes(bits int) int64 { return g.layout(bits).size() }

// CheckWritable refuses a grid that a classic TIFF cannot hold, or that the
// disk under path has no room for, with the reason and the way out.
func (g WarpGrid) CheckWritable(path string, bits int) error {
	l := g.layout(bits)
	if err := l.check(path); err != nil {
		if _, tooMany := voxelCount(l.width, l.height, l.depth); tooMany == nil && (l.bits == 8 || l.bits == 16) && l.size() > maxClassicTIFF {
			// The way out is in warp's own inputs.
			return remedy.Errorf("%s: %d × %d × %d voxels of %d bits make %.1f GiB, more than the 4 GiB a classic TIFF holds; give a coarser %s or a smaller %s",
				path, l.width, l.height, l.depth, l.bits, float64(l.size())/(1<<30), outputVoxel, outputBox)
		}
		return err
	}
	if free, ok := freeBytes(path); ok && free < uint64(l.size()) {
		return remedy.Errorf("%s: the warped stack needs %.1f GiB and the disk has %.1f GiB free; free some space, give a coarser %s or a smaller %s",
			path, float64(l.size())/(1<<30), float64(free)/(1<<30), outputVoxel, outputBox)
	}
	return nil
}

// rowBand is the number of output rows mapped and sampled together: one
// root cell of the adaptive grid.
const rowBand = rootCell

// Warp resamples the stack src (geometry g) into grid and writes it to path
// as a multi-page TIFF that records the grid's geometry, whole or not at all.
// Output voxel q takes the trilinear value of src at t⁻¹(q) (t(q) with
// opt.Inverse), computed as Resample does: exactly on an adaptive grid within
// opt.ToleranceUM, bilinearly between; outside src it is 0.
//
// It streams: each output page is made from stretches of 64 rows, for which
// only the input pages the stretch reaches are decoded (kept while they fit
// in opt.MemoryBytes), and written before the next begins, so neither the
// input nor the output is ever whole in memory. The mapping and sampling
// run on all cores; rep counts the voxels outside the input. A cancelled
// ctx stops it between stretches and leaves no file.
func Warp(ctx context.Context, path string, t transform.Transform, src Pages, g Geometry, grid WarpGrid, opt WarpOptions, pr progress.Reporter) (WarpReport, error) {
	var rep WarpReport
	h := src.Header()
	if err := checkVoxel(g.VoxelUM); err != nil {
		return rep, fmt.Errorf("imaging: warp: voxel size of %s: %w", h.name(), err)
	}
	if err := refuseOwnInput(path, h.Path); err != nil {
		return rep, err
	}
	tol := opt.ToleranceUM
	if tol == 0 {
		tol = DefaultToleranceUM
	}
	if !(tol > 0) || math.IsInf(tol, 0) {
		return rep, fmt.Errorf("imaging: warp: tolerance %v µm: want a positive number", opt.ToleranceUM)
	}
	l := grid.layout(h.Bits)
	if err := l.check(path); err != nil {
		return rep, err
	}
	budget := opt.MemoryBytes
	if budget == 0 {
		budget = DefaultWarpMemory
	}
	pageBytes := int64(h.Width) * int64(h.Height) * 2
	maxPages := max(int(budget/pageBytes), 2)

	mapPoint := targetToSource(t, opt.Inverse)
	pages := make([][]uint16, h.Depth)
	var loaded []int // page indices held, oldest first
	smp := newPageSampler(pages, h.Width, h.Height, g.VoxelUM, g.OriginUM)
	w, ht := grid.Size[0], grid.Size[1]
	out := make([]uint16, w*ht)
	band := make([]transform.Vec, w*rowBand)
	bandOK := make([]bool, w*rowBand)

	// need makes pages k0 … k1 present, dropping the oldest others when
	// the bound is reached.
	need := func(k0, k1 int) error {
		if k1-k0+1 > maxPages {
			return remedy.Errorf("imaging: warp: 64 output rows reach %d pages of %s, more than the %d that fit in %.0f MiB; raise %s or warp a smaller %s",
				k1-k0+1, h.name(), maxPages, float64(budget)/(1<<20), remedy.Ref{Input: remedy.MemoryLimit, Words: "the memory limit"}, outputBox)
		}
		for k := k0; k <= k1; k++ {
			if pages[k] != nil {
				continue
			}
			var buf []uint16
			for len(loaded) >= maxPages {
				old := loaded[0]
				loaded = loaded[1:]
				if old >= k0 && old <= k1 {
					loaded = append(loaded, old)
					continue
				}
				buf, pages[old] = pages[old], nil
			}
			if buf == nil {
				buf = make([]uint16, h.Width*h.Height)
			}
			if err := src.ReadPage(k, buf); err != nil {
				return err
			}
			pages[k] = buf
			loaded = append(loaded, k)
			rep.PagesRead++
			rep.MostPagesHeld = max(rep.MostPagesHeld, len(loaded))
		}
		return nil
	}

	pr = progress.Of(pr)
	pr.Step("warping: output pages", grid.Size[2])
	defer pr.Finish()
	err := outfile.Write(ctx, path, func(fw io.Writer) error {
		tw, err := newTIFFWriter(fw, l)
		if err != nil {
			return err
		}
		for k := range grid.Size[2] {
			for j0 := 0; j0 < ht; j0 += rowBand {
				if err := ctx.Err(); err != nil {
					return err
				}
				rows := min(rowBand, ht-j0)
				bg := Grid{Width: w, Height: rows, Voxel: grid.VoxelUM,
					Origin: grid.OriginUM.Add(transform.Vec{0, float64(j0) * grid.VoxelUM[1], float64(k) * grid.VoxelUM[2]})}
				f := &field{grid: bg, mapPoint: mapPoint, check: tol / 2, exact: opt.Exact}
				rep.Evaluations += f.run(func(j, i0 int, pos []transform.Vec, ok []bool) {
					copy(band[j*w+i0:], pos)
					copy(bandOK[j*w+i0:], ok)
				})
				pos, ok := band[:rows*w], bandOK[:rows*w]
				if k0, k1, any := smp.pageRange(pos, ok); any {
					if err := need(k0, k1); err != nil {
						return err
					}
				}
				counts := make([][2]int, rows)
				parallel.Ranges(rows, 1, func(lo, hi int) {
					for j := lo; j < hi; j++ {
						o, f := smp.sampleRow(out[(j0+j)*w:(j0+j+1)*w], pos[j*w:(j+1)*w], ok[j*w:(j+1)*w])
						counts[j] = [2]int{o, f}
					}
				})
				for _, c := range counts {
					rep.Outside += c[0]
					rep.NoConvergence += c[1]
				}
			}
			if err := tw.writePage(out); err != nil {
				return err
			}
			pr.Add(1)
		}
		return tw.finish()
	})
	rep.Pixels = int(grid.Voxels())
	return rep, err
}

// WarpRecord is the JSON sidecar written beside a warped stack (OUT.tif.json):
// where its voxels are, how they were made and from what.
type WarpRecord struct {
	Format  string `json:"format"`
	Version int    `json:"version"`
	// Frame is "target" (the transform's target space, EM) or "source"
	// (with --inverse).
	Frame         string           `json:"frame"`
	Image         string           `json:"image"`
	SizeVoxels    [3]int           `json:"size_voxels"`
	VoxelUM       transform.Vec    `json:"voxel_um"`
	OriginUM      transform.Vec    `json:"origin_um"`
	BoundsUM      [2]transform.Vec `json:"bounds_um"`
	Convention    string           `json:"convention"`
	Interpolation string           `json:"interpolation"`
	OutsideValue  int              `json:"outside_value"`
	BitsPerSample int              `json:"bits_per_sample"`
	// SourceStack is the input stack and the geometry used for it.
	SourceStack struct {
		Path     string        `json:"path"`
		Frame    string        `json:"frame"`
		VoxelUM  transform.Vec `json:"voxel_um"`
		OriginUM transform.Vec `json:"origin_um"`
		From     string        `json:"geometry_from"`
	} `json:"source_stack"`
	OutsideVoxels int `json:"outside_voxels"`
	// Provenance is the caller's provenance object, as in every JSON
	// output.
	Provenance any `json:"provenance"`
}

// The sidecar's format name and version.
const (
	WarpFormat  = "ferry-warped-stack"
	WarpVersion = 1
)

// NewWarpRecord fills the sidecar of a warp.
func NewWarpRecord(image string, h *Stack, g Geometry, grid WarpGrid, opt WarpOptions, rep WarpReport, prov any) WarpRecord {
	r := WarpRecord{Format: WarpFormat, Version: WarpVersion, Frame: "target", Image: image,
		SizeVoxels: grid.Size, VoxelUM: grid.VoxelUM, OriginUM: grid.OriginUM,
		Convention:    "voxel (i, j, k) is column i, row j of page k, counted from 0, centred at origin_um + (i·voxel_um[0], j·voxel_um[1], k·voxel_um[2]) in the frame's µm",
		Interpolation: "trilinear between the input's voxel centres; positions interpolated from exact ones within 0.05 µm",
		OutsideValue:  0, BitsPerSample: h.Bits, OutsideVoxels: rep.Outside + rep.NoConvergence, Provenance: prov}
	if opt.Inverse {
		r.Frame = "source"
	}
	r.BoundsUM = [2]transform.Vec{grid.OriginUM, grid.OriginUM.Add(transform.Vec{
		float64(grid.Size[0]-1) * grid.VoxelUM[0], float64(grid.Size[1]-1) * grid.VoxelUM[1], float64(grid.Size[2]-1) * grid.VoxelUM[2]})}
	r.SourceStack.Path, r.SourceStack.VoxelUM, r.SourceStack.OriginUM, r.SourceStack.From = h.Path, g.VoxelUM, g.OriginUM, g.From
	r.SourceStack.Frame = "source"
	if opt.Inverse {
		r.SourceStack.Frame = "target"
	}
	return r
}

// WriteWarpRecord writes the sidecar, whole or not at all.
func WriteWarpRecord(ctx context.Context, path string, r WarpRecord) error {
	data, err := json.MarshalIndent(r, "", "  ")
	if err != nil {
		return err
	}
	return outfile.WriteBytes(ctx, path, append(data, '\n'))
}
