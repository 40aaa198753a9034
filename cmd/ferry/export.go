package main

import (
	"fmt"
	"os"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"ferry/internal/remedy"
	"ferry/landmarks"
	"ferry/progress"
	"ferry/register"
	"ferry/register/export"
	"ferry/transform"
)

func newExportCommand() *cobra.Command {
	var out, spacing, margin, bounds, mapped, targetVoxel string
	var seed uint64
	cmd := &cobra.Command{
		Use:   "export TRANSFORM -o DIR [--mapped MAPPED.csv] [--spacing UM|X,Y,Z] [--margin UM | --bounds X0,Y0,Z0,X1,Y1,Z1]",
		Short: "Write the transform in forms other programs read: a 4×4 matrix, a displacement field, a point list",
		Long: `export writes into DIR:
  export.json          the affine part as 4×4 homogeneous matrices, the convention,
                       the field's grid and its sampling error, what made it
  affine_um.txt        the affine part, source µm to target µm (plain text)
  affine_voxel.txt     the same between voxel indices, when the transform records voxel sizes
for a thin-plate spline also
  displacement_um.tif  the displacement D(x) = f(x) − x on a regular grid over the
                       landmarks' source box widened by --margin (or over --bounds,
                       source µm), float32 ImageJ hyperstack: x' = x + D(x)
  transform.zarr       an OME-Zarr store (OME-NGFF 0.6): a sequence of displacements
                       then the affine part, source to target
and with --mapped
  points.csv           the mapped cells in target voxel indices, for viewers' point layers.
Convention: input = source (in vivo) side, column vectors, x' = A·x + t.`,
		Args: exactArgs("TRANSFORM"),
		RunE: func(cmd *cobra.Command, args []string) error {
			if strings.TrimSpace(out) == "" {
				return fmt.Errorf("-o: an output folder is required")
			}
			if bounds != "" && margin != "" {
				return usageError(cmd, "--bounds and --margin: give one (--bounds is the field's whole box)")
			}
			if info, err := os.Stat(out); err == nil && !info.IsDir() {
				return fmt.Errorf("-o %s: is a file, want a folder", out)
			}
			file, err := register.ReadRegistrationFile(args[0])
			if err != nil {
				return err
			}
			opt := export.Options{Mapped: mapped, Seed: seed, Grid: export.GridOptions{Margin: -1}}
			dim := file.Transform.Dim()
			if spacing != "" {
				if opt.Grid.Spacing, err = parseSpacing(spacing, dim); err != nil {
					return err
				}
			}
			if margin != "" {
				v, err := strconv.ParseFloat(margin, 64)
				if err != nil || !(v >= 0) || v > 1e9 {
					return fmt.Errorf("--margin %q: want a distance in µm, 0 or more", margin)
				}
				opt.Grid.Margin = v
			}
			if bounds != "" {
				b, err := parseBox(bounds, dim)
				if err != nil {
					return err
				}
				opt.Grid.Bounds = &b
			}
			if opt.TargetVoxel, err = optionalTriple("--target-voxel", targetVoxel, dim); err != nil {
				return err
			}
			// The transform file as it was read; the mapped cells, which
			// export reads itself, by their bytes.
			inputs := []register.Input{file.Input()}
			if mapped != "" {
				m, err := inputsOf(mapped)
				if err != nil {
					return err
				}
				inputs = append(inputs, m...)
			}
			opt.Provenance = register.Provenance{Command: "export", Inputs: inputs, Flags: setFlags(cmd)}
			opt.Progress = progress.Terminal(os.Stderr)
			res, err := export.Write(cmd.Context(), out, file, opt)
			if err != nil {
				return err
			}
			for _, n := range res.Notes {
				note := n.String()
				if m, ok := n.(remedy.Message); ok {
					note = m.Named(flagName)
				}
				fmt.Fprintf(cmd.ErrOrStderr(), "ferry: warning: %s\n", note)
			}
			printExport(cmd, res)
			return nil
		},
	}
	cmd.Flags().StringVarP(&out, "output", "o", "", "folder to write into (created if need be)")
	cmd.Flags().StringVar(&spacing, "spacing", "", "grid spacing of the displacement field in µm: one number or X,Y,Z (default: 1/48 of the box's longest side, rounded up)")
	cmd.Flags().StringVar(&margin, "margin", "", "margin around the landmarks' source box in µm (default: 10 % of its longest side)")
	cmd.Flags().StringVar(&bounds, "bounds", "", "the field's box in source µm, X0,Y0,Z0,X1,Y1,Z1 (X0,Y0,X1,Y1 in 2-D), in place of the landmarks' box and --margin")
	cmd.Flags().StringVar(&mapped, "mapped", "", "mapped cells (the output of map) to write as a target-voxel point list")
	cmd.Flags().StringVar(&targetVoxel, "target-voxel", "", "target voxel size X,Y,Z in µm for the point list, when the transform records none")
	cmd.Flags().Uint64Var(&seed, "seed", 1, "seed of the random points at which the sampling error is measured")
	return cmd
}

// parseBox reads a box in µm, the lower corner then the upper: six numbers
// in 3-D, four in 2-D.
func parseBox(value string, dim int) ([2]transform.Vec, error) {
	var b [2]transform.Vec
	names := "X0,Y0,Z0,X1,Y1,Z1"
	if dim == 2 {
		names = "X0,Y0,X1,Y1"
	}
	v, err := landmarks.ParseNumbers("--bounds", value, 2*dim, names)
	if err != nil {
		return b, err
	}
	copy(b[0][:dim], v[:dim])
	copy(b[1][:dim], v[dim:])
	for k := range dim {
		if !(b[1][k] > b[0][k]) {
			return b, fmt.Errorf("--bounds %q: the upper corner must lie beyond the lower along every axis (%s from %g to %g)", value, "xyz"[k:k+1], b[0][k], b[1][k])
		}
	}
	return b, nil
}

// parseSpacing reads one spacing for every axis, or one per axis.
func parseSpacing(s string, dim int) (transform.Vec, error) {
	if !strings.Contains(s, ",") {
		v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
		if err != nil || !(v > 0) || v > 1e9 {
			return transform.Vec{}, fmt.Errorf("--spacing %q: want a positive distance in µm, or X,Y,Z", s)
		}
		return transform.Vec{v, v, v}, nil
	}
	v, err := landmarks.ParseTriple("--spacing", s, dim)
	if err != nil {
		return transform.Vec{}, err
	}
	for k := range dim {
		if !(v[k] > 0) {
			return transform.Vec{}, fmt.Errorf("--spacing %q: every spacing must be positive", s)
		}
	}
	return v, nil
}

func printExport(cmd *cobra.Command, res *export.Result) {
	w := cmd.OutOrStdout()
	fmt.Fprintf(w, "Wrote %s: %s\n", res.Dir, strings.Join(res.Files, ", "))
	a := res.Affine
	fmt.Fprintln(w, "Affine part, source µm to target µm (x' = A·x + t, column vectors):")
	for _, row := range a {
		fmt.Fprintf(w, "  %12.6g %12.6g %12.6g %12.6g\n", row[0], row[1], row[2], row[3])
	}
	if f := res.Field; f != nil {
		g := f.Grid
		end := g.End()
		if g.Dim == 2 {
			fmt.Fprintf(w, "Displacement field: %d × %d samples, spacing %g × %g µm, over source x %.1f to %.1f, y %.1f to %.1f µm.\n",
				g.Size[0], g.Size[1], g.Spacing[0], g.Spacing[1], g.Origin[0], end[0], g.Origin[1], end[1])
		} else {
			fmt.Fprintf(w, "Displacement field: %d × %d × %d samples, spacing %g × %g × %g µm, over source x %.1f to %.1f, y %.1f to %.1f, z %.1f to %.1f µm.\n",
				g.Size[0], g.Size[1], g.Size[2], g.Spacing[0], g.Spacing[1], g.Spacing[2],
				g.Origin[0], end[0], g.Origin[1], end[1], g.Origin[2], end[2])
		}
		fmt.Fprintf(w, "Sampling error against the spline, linear interpolation:\n  TIFF x + D(x):         %s\n  Zarr A·(x + d(x)) + t: %s\n",
			res.TotalError, res.SequenceError)
	}
	if res.Points > 0 || res.Unplaced > 0 {
		fmt.Fprintf(w, "Point list: %d cells in target voxels", res.Points)
		if res.Unplaced > 0 {
			fmt.Fprintf(w, " (%d without a position left out)", res.Unplaced)
		}
		fmt.Fprintln(w, ".")
	}
}
