package main

import (
	"fmt"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"ferry/imaging"
	"ferry/landmarks"
	"ferry/register"
	"ferry/transform"
)

// imageFlags are the flags resample and overlay share.
type imageFlags struct {
	targetZ                    int
	targetZSet                 bool
	inverse                    bool
	sourceVoxel, targetVoxel   string
	sourceOrigin, targetOrigin string
	out                        string
}

func (f *imageFlags) register(cmd *cobra.Command) {
	fl := cmd.Flags()
	fl.IntVar(&f.targetZ, "target-z", 0, "page (voxel index along z) of the output plane in its space (default: the plane's own, else 0)")
	fl.BoolVar(&f.inverse, "inverse", false, "the stack is in the target space: resample it onto a source plane")
	registerGeometryFlags(cmd, &f.sourceVoxel, &f.targetVoxel, &f.sourceOrigin, &f.targetOrigin)
	fl.StringVarP(&f.out, "output", "o", "", "image to write")
}

// registerGeometryFlags adds the flags that state an image's voxel size and
// origin where its file records none (or records them wrong).
func registerGeometryFlags(cmd *cobra.Command, sourceVoxel, targetVoxel, sourceOrigin, targetOrigin *string) {
	fl := cmd.Flags()
	fl.StringVar(sourceVoxel, "source-voxel", "", "voxel size X,Y,Z in µm of the source-side image (default: from its file, else the transform file)")
	fl.StringVar(targetVoxel, "target-voxel", "", "voxel size X,Y,Z in µm of the target-side image (default: from its file, else the transform file)")
	fl.StringVar(sourceOrigin, "source-origin", "", "position X,Y,Z in µm of the source-side image's voxel (0,0,0) (default: from its file, else 0,0,0)")
	fl.StringVar(targetOrigin, "target-origin", "", "position X,Y,Z in µm of the target-side image's voxel (0,0,0) (default: from its file, else 0,0,0)")
}

// given collects what the flags and the transform file say about one
// side's image geometry.
func given(voxelFlag, voxel, originFlag, origin string, recorded *transform.Vec) (imaging.Given, error) {
	g := imaging.Given{VoxelFlag: voxelFlag, OriginFlag: originFlag, Fallback: recorded}
	if voxel != "" {
		v, err := landmarks.ParseTriple(voxelFlag, voxel, 3)
		if err != nil {
			return g, err
		}
		g.Voxel = &v
	}
	if origin != "" {
		v, err := landmarks.ParseNumbers(originFlag, origin, 3, "X,Y,Z")
		if err != nil {
			return g, err
		}
		g.Origin = &transform.Vec{v[0], v[1], v[2]}
	}
	return g, nil
}

// resampleJob is a transform, a stack and a plane to fill, with their
// geometries settled.
type resampleJob struct {
	file                *register.Registration
	stack, plane        *imaging.Stack
	stackGeom, gridGeom imaging.Geometry
	grid                imaging.Grid
	planePath           string
}

func (f *imageFlags) load(cmd *cobra.Command, transformPath, stackPath, planePath string) (*resampleJob, error) {
	f.targetZSet = cmd.Flags().Changed("target-z")
	if f.targetZ < 0 {
		return nil, fmt.Errorf("--target-z: %d is negative: want a page index ≥ 0", f.targetZ)
	}
	file, err := register.ReadRegistrationFile(transformPath)
	if err != nil {
		return nil, err
	}
	if file.Transform.Dim() != 3 {
		return nil, fmt.Errorf("%s: images need a 3-D transform, this one is 2-D", transformPath)
	}
	src, err := given("--source-voxel", f.sourceVoxel, "--source-origin", f.sourceOrigin, file.Voxels.Source)
	if err != nil {
		return nil, err
	}
	dst, err := given("--target-voxel", f.targetVoxel, "--target-origin", f.targetOrigin, file.Voxels.Target)
	if err != nil {
		return nil, err
	}
	stackSide, planeSide := src, dst
	if f.inverse {
		stackSide, planeSide = dst, src
	}
	job := &resampleJob{file: file, planePath: planePath}
	if job.stack, err = imaging.ReadStack(stackPath); err != nil {
		return nil, err
	}
	if job.stackGeom, err = imaging.Settle(job.stack, stackSide); err != nil {
		return nil, err
	}
	like, err := imaging.ReadStack(planePath)
	if err != nil {
		return nil, err
	}
	if job.gridGeom, err = imaging.Settle(like, planeSide); err != nil {
		return nil, err
	}
	var z *int
	if f.targetZSet {
		z = &f.targetZ
	}
	grid, page, err := imaging.PlaneGrid(like, job.gridGeom, z)
	if err != nil {
		return nil, err
	}
	job.grid = grid
	if job.plane, err = like.Page(page); err != nil {
		return nil, err
	}
	return job, nil
}

// resample fills the plane, and refuses when the stack reaches none of it.
func (j *resampleJob) resample(f *imageFlags) (*imaging.Stack, imaging.ResampleReport, error) {
	out, rep, err := imaging.ResampleWithReport(j.file.Transform, j.stack, j.stackGeom.VoxelUM, j.grid,
		imaging.ResampleOptions{Inverse: f.inverse, StackOrigin: j.stackGeom.OriginUM})
	if err != nil {
		return nil, rep, err
	}
	if rep.Outside+rep.NoConvergence == rep.Pixels {
		g := j.grid.Geometry()
		lo, hi := g.Extent(j.grid.Width, j.grid.Height, 1)
		return nil, rep, imaging.NoOverlap(j.stack, j.stackGeom, j.file.Transform, f.inverse,
			j.planePath, lo, hi)
	}
	return out, rep, nil
}

func (j *resampleJob) describe(r imaging.ResampleReport) string {
	g := j.grid.Geometry()
	s := fmt.Sprintf("%s (%s) onto the plane at z = %s µm of %s (%s): %d pixels, %.1f %% outside the stack",
		j.stack.Path, j.stackGeom.Describe(), strconv.FormatFloat(g.OriginUM[2], 'g', 6, 64), j.planePath, j.gridGeom.Describe(), r.Pixels, 100*r.OutsideShare())
	if r.NoConvergence > 0 {
		s += fmt.Sprintf(", %d where the transform could not be inverted", r.NoConvergence)
	}
	return s
}

func newResampleCommand() *cobra.Command {
	var f imageFlags
	var like string
	cmd := &cobra.Command{
		Use:   "resample TRANSFORM SOURCE_STACK --like TARGET_IMAGE -o OUT.tif",
		Short: "Resample the source stack onto the pixel grid of one target plane",
		Long: `resample fills the pixel grid of TARGET_IMAGE (a plane, or page --target-z
of a stack) from SOURCE_STACK (a multi-page TIFF or a folder of TIFF/PNG
planes) through the inverse of the transform, by trilinear interpolation.
With --inverse the stack is in the target and the plane in the source.

Each image's voxel size and origin come from its file (ImageJ metadata or
TIFF resolution tags), else from --source-voxel/--target-voxel and
--source-origin/--target-origin, else from the transform file. A plane that
records its z position is drawn there; --target-z must then agree. When the
stack reaches no pixel of the plane, nothing is written and the message says
where the stack maps.`,
		Args: exactArgs("TRANSFORM", "SOURCE_STACK"),
		RunE: func(cmd *cobra.Command, args []string) error {
			if like == "" {
				return fmt.Errorf("--like: a target image whose pixel grid to fill is required")
			}
			if err := refuseStdout(f.out, "an image"); err != nil {
				return err
			}
			if err := requireOutput(f.out, args[0], args[1], like); err != nil {
				return err
			}
			format, err := imageFormat(f.out, "tiff", "tiff", "png")
			if err != nil {
				return err
			}
			job, err := f.load(cmd, args[0], args[1], like)
			if err != nil {
				return err
			}
			out, rep, err := job.resample(&f)
			if err != nil {
				return err
			}
			// Writing an image is not cut short; an interrupt during the
			// resampling stops it from starting.
			if err := cmd.Context().Err(); err != nil {
				return fmt.Errorf("%s not written: %w", f.out, err)
			}
			write := func() error { return imaging.WriteTIFFContext(cmd.Context(), f.out, out) }
			if format == "png" {
				write = func() error { return imaging.WritePNGContext(cmd.Context(), f.out, out.Image(0)) }
			}
			if err := write(); err != nil {
				return err
			}
			fprintf(cmd.OutOrStdout(), "Resampled %s. Wrote %s\n", job.describe(rep), f.out)
			warnMostlyOutside(cmd, rep)
			return nil
		},
	}
	f.register(cmd)
	cmd.Flags().StringVar(&like, "like", "", "target image (TIFF or PNG) whose pixel grid the output takes")
	return cmd
}

// imageFormat is the format of an image output by its extension: .tif or
// .tiff for TIFF, .png for PNG, among those allowed; a name without an
// extension (a device such as /dev/null, say) takes def. Any other
// extension is refused before the work starts: the data written must be what
// the name says.
func imageFormat(out, def string, allowed ...string) (string, error) {
	ext := strings.ToLower(filepath.Ext(out))
	format := ""
	switch ext {
	case "":
		return def, nil
	case ".tif", ".tiff":
		format = "tiff"
	case ".png":
		format = "png"
	}
	var kinds, names []string
	for _, a := range allowed {
		if a == format {
			return format, nil
		}
		kinds = append(kinds, strings.ToUpper(a))
		names = append(names, map[string]string{"tiff": ".tif or .tiff", "png": ".png"}[a])
	}
	return "", fmt.Errorf("-o %s: this command writes %s images: name the output %s", out, strings.Join(kinds, " or "), strings.Join(names, " or "))
}

// mostlyOutside is the share of a plane outside the stack from which the
// result is more likely a wrong voxel size or page than a real edge.
const mostlyOutside = 0.9

// warnMostlyOutside says on stderr when the stack reached only a sliver of
// the plane: no pixel at all is refused (NoOverlap), but a nearly empty
// image deserves a word too.
func warnMostlyOutside(cmd *cobra.Command, rep imaging.ResampleReport) {
	if share := rep.OutsideShare(); share > mostlyOutside {
		fmt.Fprintf(cmd.ErrOrStderr(), "ferry: warning: %.1f %% of the plane lies outside the stack; if that is unexpected, check the voxel sizes, origins and --target-z\n", 100*share)
	}
}
