package main

import (
	"fmt"
	"os"

	"github.com/spf13/cobra"

	"ferry/imaging"
	"ferry/landmarks"
	"ferry/progress"
	"ferry/register"
	"ferry/transform"
)

func newWarpCommand() *cobra.Command {
	var out, voxel, bounds string
	var inverse bool
	var sourceVoxel, targetVoxel, sourceOrigin, targetOrigin string
	var memoryGiB float64
	cmd := &cobra.Command{
		Use:   "warp TRANSFORM SOURCE_STACK -o OUT.tif --voxel X,Y,Z [--bounds X0,Y0,Z0,X1,Y1,Z1] [--inverse]",
		Short: "Resample the whole source stack into the target frame",
		Long: `warp resamples SOURCE_STACK (a multi-page TIFF or a folder of TIFF/PNG planes)
into the target frame through the inverse of the transform, by trilinear
interpolation, on a grid of --voxel µm over --bounds (target µm; output voxel
(0,0,0) at X0,Y0,Z0) or, without it, over the stack's box mapped through the
transform. With --inverse the stack is in the target frame and goes back to
the source frame.

Writes OUT.tif, a multi-page TIFF that records its voxel size and origin
(ImageJ metadata and resolution tags), and OUT.tif.json beside it (the
frame, voxel size, origin, interpolation and provenance). The stack is read
and written page by page, so a stack larger than memory works; the input
stack's geometry comes from its file or the voxel and origin flags, as for
resample.`,
		Args: exactArgs("TRANSFORM", "SOURCE_STACK"),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := requireOutput(out, args[0], args[1]); err != nil {
				return err
			}
			if _, err := imageFormat(out, "tiff", "tiff"); err != nil {
				return err
			}
			sidecar := out + ".json"
			if err := requireOutput(sidecar, args[0], args[1]); err != nil {
				return err
			}
			if voxel == "" {
				return usageError(cmd, "--voxel: the output voxel size X,Y,Z in µm is required")
			}
			opt := imaging.WarpOptions{Inverse: inverse, MemoryBytes: int64(memoryGiB * (1 << 30))}
			var err error
			if opt.VoxelUM, err = landmarks.ParseTriple("--voxel", voxel, 3); err != nil {
				return err
			}
			if memoryGiB < 0.01 {
				return fmt.Errorf("--memory-gib %g: want at least 0.01", memoryGiB)
			}
			if bounds != "" {
				b, err := parseBounds(bounds)
				if err != nil {
					return err
				}
				opt.Bounds = &b
			}
			file, err := register.ReadRegistrationFile(args[0])
			if err != nil {
				return err
			}
			if file.Transform.Dim() != 3 {
				return fmt.Errorf("%s: images need a 3-D transform, this one is 2-D", args[0])
			}
			side, err := given("--source-voxel", sourceVoxel, "--source-origin", sourceOrigin, file.Voxels.Source)
			if inverse {
				side, err = given("--target-voxel", targetVoxel, "--target-origin", targetOrigin, file.Voxels.Target)
			}
			if err != nil {
				return err
			}
			pages, err := imaging.OpenPages(args[1])
			if err != nil {
				return err
			}
			defer pages.Close()
			h := pages.Header()
			geom, err := imaging.Settle(h, side)
			if err != nil {
				return err
			}
			grid, err := imaging.PlanWarp(file.Transform, h, geom, opt)
			if err != nil {
				return err
			}
			if err := grid.CheckWritable(out, h.Bits); err != nil {
				return err
			}
			// The inputs are read for the record before anything is
			// written, so that an unreadable one leaves no image behind.
			stack, err := stackInput(args[1])
			if err != nil {
				return err
			}
			inputs := []register.Input{file.Input(), stack}
			rep, err := imaging.Warp(cmd.Context(), out, file.Transform, pages, geom, grid, opt, progress.Terminal(os.Stderr))
			if err != nil {
				return err
			}
			prov := register.Provenance{Command: "warp", Inputs: inputs, Flags: setFlags(cmd)}
			err = imaging.WriteWarpRecord(cmd.Context(), sidecar, imaging.NewWarpRecord(out, h, geom, grid, opt, rep, prov.Line()))
			if err != nil {
				// OUT.tif is whole and records its own geometry; a
				// record left from an earlier run would describe
				// another image, so it goes.
				os.Remove(sidecar)
				return fmt.Errorf("%w (%s was written without its record)", err, out)
			}
			frame := "target"
			if inverse {
				frame = "source"
			}
			w := cmd.OutOrStdout()
			fprintf(w, "Warped %s (%s) into the %s frame: %d × %d × %d voxels of %g × %g × %g µm, voxel (0, 0, 0) at (%g, %g, %g) µm, %.1f %% outside the stack.\n",
				h.Path, geom.Describe(), frame, grid.Size[0], grid.Size[1], grid.Size[2],
				grid.VoxelUM[0], grid.VoxelUM[1], grid.VoxelUM[2], grid.OriginUM[0], grid.OriginUM[1], grid.OriginUM[2], 100*rep.OutsideShare())
			fprintf(w, "Wrote %s and %s\n", out, sidecar)
			return nil
		},
	}
	fl := cmd.Flags()
	fl.StringVarP(&out, "output", "o", "", "multi-page TIFF to write (its record goes to OUT.tif.json)")
	fl.StringVar(&voxel, "voxel", "", "output voxel size X,Y,Z in µm (required)")
	fl.StringVar(&bounds, "bounds", "", "output box X0,Y0,Z0,X1,Y1,Z1 in µm of the output frame (default: the stack's mapped box)")
	fl.BoolVar(&inverse, "inverse", false, "the stack is in the target frame: warp it back into the source frame")
	fl.Float64Var(&memoryGiB, "memory-gib", 1, "GiB of decoded input pages to hold at once")
	registerGeometryFlags(cmd, &sourceVoxel, &targetVoxel, &sourceOrigin, &targetOrigin)
	return cmd
}

// parseBounds reads X0,Y0,Z0,X1,Y1,Z1.
func parseBounds(value string) ([2]transform.Vec, error) {
	var b [2]transform.Vec
	v, err := landmarks.ParseNumbers("--bounds", value, 6, "X0,Y0,Z0,X1,Y1,Z1")
	if err != nil {
		return b, err
	}
	copy(b[0][:], v[:3])
	copy(b[1][:], v[3:])
	return b, nil
}
