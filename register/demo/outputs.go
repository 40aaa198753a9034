// The demo's overlay, warped stack and quality report, each made as its
// command makes it.

package demo

import (
	"context"
	"fmt"

	"ferry/imaging"
	"ferry/register"
	"ferry/register/report"
	"ferry/status"
	"ferry/transform"
)

type overlayResult struct {
	path    string
	marks   int
	outside float64
}

// writeOverlay resamples the in vivo stack onto the EM plane through the
// fitted transform, as ferry overlay does, and marks the mapped cells near
// the plane. The images' geometry comes from their files, as it does for
// the command.
func writeOverlay(ctx context.Context, path string, t transform.Transform, stackPath, planePath string, mapped []register.Mapped, cellIDs []string) (overlayResult, error) {
	stack, err := imaging.ReadStack(stackPath)
	if err != nil {
		return overlayResult{}, err
	}
	plane, err := imaging.ReadPlane(planePath)
	if err != nil {
		return overlayResult{}, err
	}
	sg, err := imaging.Settle(stack, imaging.Given{VoxelFlag: "--source-voxel"})
	if err != nil {
		return overlayResult{}, err
	}
	pg, err := imaging.Settle(plane, imaging.Given{VoxelFlag: "--target-voxel"})
	if err != nil {
		return overlayResult{}, err
	}
	grid, _, err := imaging.PlaneGrid(plane, pg, nil)
	if err != nil {
		return overlayResult{}, err
	}
	resampled, rep, err := imaging.ResampleWithReport(t, stack, sg.VoxelUM, grid, imaging.ResampleOptions{StackOrigin: sg.OriginUM})
	if err != nil {
		return overlayResult{}, err
	}
	pos := make([]transform.Vec, len(mapped))
	reach := make([]float64, len(mapped))
	states := make([]status.Status, len(mapped))
	for i, m := range mapped {
		pos[i], reach[i], states[i] = m.Pos, m.R95, m.Status
	}
	marks := imaging.PlaneMarks(pos, reach, states, cellIDs, grid)
	img := imaging.Overlay(plane, resampled, marks, imaging.OverlayOptions{PixelUM: grid.Voxel[0]})
	if err := ctx.Err(); err != nil {
		return overlayResult{}, err
	}
	if err := imaging.WritePNGContext(ctx, path, img); err != nil {
		return overlayResult{}, err
	}
	return overlayResult{path: path, marks: len(marks), outside: rep.OutsideShare()}, nil
}

// WarpedFile is the in vivo stack warped into the EM frame.
const WarpedFile = "invivo_in_em.tif"

// WarpedVoxelUM is the demo's warp grid: the in vivo stack's own voxel
// size, so that the warped stack is no larger than the original.
var WarpedVoxelUM = transform.Vec{3, 3, 5}

// writeWarped warps the in vivo stack into the target frame over its mapped
// box, as ferry warp --voxel 3,3,5 does, with the record beside it.
func writeWarped(ctx context.Context, path string, reg *register.Registration, stackPath string) error {
	t := reg.Transform
	pages, err := imaging.OpenPages(stackPath)
	if err != nil {
		return err
	}
	defer pages.Close()
	h := pages.Header()
	g, err := imaging.Settle(h, imaging.Given{VoxelFlag: "--source-voxel"})
	if err != nil {
		return err
	}
	opt := imaging.WarpOptions{VoxelUM: WarpedVoxelUM}
	grid, err := imaging.PlanWarp(t, h, g, opt)
	if err != nil {
		return err
	}
	rep, err := imaging.Warp(ctx, path, t, pages, g, grid, opt, nil)
	if err != nil {
		return err
	}
	prov := register.Provenance{Command: "warp", Inputs: []register.Input{
		reg.Input(), {Path: stackPath, SHA256: sha(stackPath)}},
		Flags: []string{fmt.Sprintf("--voxel=%g,%g,%g", WarpedVoxelUM[0], WarpedVoxelUM[1], WarpedVoxelUM[2])}}
	return imaging.WriteWarpRecord(ctx, path+".json", imaging.NewWarpRecord(path, h, g, grid, opt, rep, prov.Line()))
}

// writeReport writes the quality report from the files the demo wrote, as
// ferry report --transform --mapped does.
func writeReport(ctx context.Context, path string, f *Files) error {
	in := &report.Input{}
	if err := report.FromTransform(in, f.Landmarks, f.Transform); err != nil {
		return err
	}
	in.Provenance.Command = "report"
	if err := report.AddTables(in, f.Mapped, f.Matches); err != nil {
		return err
	}
	page, err := report.New(in)
	if err != nil {
		return err
	}
	return page.WriteFile(ctx, path)
}
