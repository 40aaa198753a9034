package main

import (
	"fmt"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"ferry/landmarks"
	"ferry/register/imaging"
	"ferry/transform"
)

// imageFlags are the flags resample and overlay share.
type imageFlags struct {
	targetZ                  int
	inverse                  bool
	sourceVoxel, targetVoxel string
	out                      string
}

func (f *imageFlags) register(cmd *cobra.Command) {
	fl := cmd.Flags()
	fl.IntVar(&f.targetZ, "target-z", 0, "page (voxel index along z) of the output plane in its space")
	fl.BoolVar(&f.inverse, "inverse", false, "the stack is in the target space: resample it onto a source plane")
	fl.StringVar(&f.sourceVoxel, "source-voxel", "", "source voxel size X,Y,Z in µm (default: from the transform file)")
	fl.StringVar(&f.targetVoxel, "target-voxel", "", "target voxel size X,Y,Z in µm (default: from the transform file)")
	fl.StringVarP(&f.out, "output", "o", "", "image to write")
}

// resampleJob is a transform, a stack and a plane to fill, with their voxel
// sizes settled.
type resampleJob struct {
	file              *transform.File
	stack, plane      *imaging.Stack
	stackVox, gridVox transform.Vec
}

func (f *imageFlags) load(transformPath, stackPath, planePath string) (*resampleJob, error) {
	if f.targetZ < 0 {
		return nil, fmt.Errorf("--target-z: %d is negative: want a page index ≥ 0", f.targetZ)
	}
	file, err := transform.ReadFile(transformPath)
	if err != nil {
		return nil, err
	}
	if file.Transform.Dim() != 3 {
		return nil, fmt.Errorf("%s: images need a 3-D transform, this one is 2-D", transformPath)
	}
	src, err := voxelSize("--source-voxel", f.sourceVoxel, file.SourceVoxel)
	if err != nil {
		return nil, err
	}
	dst, err := voxelSize("--target-voxel", f.targetVoxel, file.TargetVoxel)
	if err != nil {
		return nil, err
	}
	job := &resampleJob{file: file, stackVox: src, gridVox: dst}
	if f.inverse {
		job.stackVox, job.gridVox = dst, src
	}
	if job.stack, err = imaging.ReadStack(stackPath); err != nil {
		return nil, err
	}
	if job.plane, err = imaging.ReadPlane(planePath); err != nil {
		return nil, err
	}
	return job, nil
}

// voxelSize is the flag's value, else the transform file's.
func voxelSize(name, value string, recorded *transform.Vec) (transform.Vec, error) {
	if value != "" {
		return landmarks.ParseTriple(name, value, 3)
	}
	if recorded != nil {
		return *recorded, nil
	}
	return transform.Vec{}, fmt.Errorf("%s: the transform file records no voxel size for this side; give it in µm, e.g. %s 1,1,1", name, name)
}

func (j *resampleJob) resample(f *imageFlags) (*imaging.Stack, imaging.ResampleReport, error) {
	grid := imaging.GridLike(j.plane, j.gridVox, f.targetZ)
	return imaging.ResampleWithReport(j.file.Transform, j.stack, j.stackVox, grid, imaging.ResampleOptions{Inverse: f.inverse})
}

func describeResample(r imaging.ResampleReport) string {
	s := fmt.Sprintf("%d pixels, %.1f %% outside the stack", r.Pixels, 100*r.OutsideShare())
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
		Long: `resample fills the pixel grid of TARGET_IMAGE, at target page --target-z,
from SOURCE_STACK (a multi-page TIFF or a folder of TIFF/PNG planes) through
the inverse of the transform, by trilinear interpolation. With --inverse the
stack is in the target and the plane in the source.`,
		Args: cobra.ExactArgs(2),
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
			job, err := f.load(args[0], args[1], like)
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
			fprintf(cmd.OutOrStdout(), "Resampled %s. Wrote %s\n", describeResample(rep), f.out)
			return nil
		},
	}
	f.register(cmd)
	cmd.Flags().StringVar(&like, "like", "", "target image (TIFF or PNG) whose pixel grid the output takes")
	return cmd
}

func newOverlayCommand() *cobra.Command {
	var f imageFlags
	var mapped string
	cmd := &cobra.Command{
		Use:   "overlay TRANSFORM SOURCE_STACK TARGET_IMAGE -o OUT.png",
		Short: "A colour composite of a target plane and the resampled source, for the eye",
		Long: `overlay resamples the source stack onto the target plane as resample does and
writes a colour composite: the target plane in sky blue, the resampled source
in orange (Okabe & Ito's colour-blind-safe palette), each contrast-stretched.
With --mapped, the mapped cells that lie within one page of the plane are
marked, coloured by status.`,
		Args: cobra.ExactArgs(3),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := refuseStdout(f.out, "an image"); err != nil {
				return err
			}
			if err := requireOutput(f.out, args[0], args[1], args[2], mapped); err != nil {
				return err
			}
			if _, err := imageFormat(f.out, "png", "png"); err != nil {
				return err
			}
			job, err := f.load(args[0], args[1], args[2])
			if err != nil {
				return err
			}
			out, rep, err := job.resample(&f)
			if err != nil {
				return err
			}
			var marks []imaging.Mark
			if mapped != "" {
				if marks, err = readMarks(mapped, job, &f); err != nil {
					return err
				}
			}
			img := imaging.Overlay(job.plane, out, marks, imaging.OverlayOptions{})
			if err := cmd.Context().Err(); err != nil {
				return fmt.Errorf("%s not written: %w", f.out, err)
			}
			if err := imaging.WritePNGContext(cmd.Context(), f.out, img); err != nil {
				return err
			}
			fprintf(cmd.OutOrStdout(), "Overlay of %s, %d cells marked. Wrote %s\n", describeResample(rep), len(marks), f.out)
			return nil
		},
	}
	f.register(cmd)
	cmd.Flags().StringVar(&mapped, "mapped", "", "mapped cells (the output of map) to mark on the plane")
	return cmd
}

// readMarks reads a map output and keeps the cells whose 95 % sphere meets
// the plane. map writes target voxels when the transform records them, else
// micrometres.
func readMarks(path string, job *resampleJob, f *imageFlags) ([]imaging.Mark, error) {
	set, err := landmarks.ReadPoints(path, "mapped cells")
	if err != nil {
		return nil, err
	}
	if set.Dim != 3 {
		return nil, fmt.Errorf("%s: 2-D mapped cells cannot be marked on a plane of a 3-D volume (the file has no z column)", path)
	}
	status, r95 := -1, -1
	for i, c := range set.ExtraColumns {
		switch strings.ToLower(c) {
		case "status":
			status = i
		case "r95_um":
			r95 = i
		}
	}
	written := job.file.TargetVoxel
	if f.inverse {
		written = job.file.SourceVoxel
	}
	pos := make([]transform.Vec, len(set.Points))
	reach := make([]float64, len(set.Points))
	states := make([]string, len(set.Points))
	for n, p := range set.Points {
		pos[n] = p.Pos
		if written != nil {
			for k := range 3 {
				pos[n][k] *= written[k]
			}
		}
		if status >= 0 {
			states[n] = p.Extra[status]
		}
		if r95 >= 0 {
			if v, err := strconv.ParseFloat(p.Extra[r95], 64); err == nil && v > 0 {
				reach[n] = v
			}
		}
	}
	return imaging.PlaneMarks(pos, reach, states, imaging.GridLike(job.plane, job.gridVox, f.targetZ)), nil
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
