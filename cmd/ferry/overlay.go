// ferry overlay, and the marks it draws: mapped or matched cells near the
// plane.

package main

import (
	"cmp"
	"fmt"
	"io"
	"slices"
	"strings"

	"github.com/spf13/cobra"

	"ferry/imaging"
	"ferry/landmarks"
	"ferry/register"
	"ferry/register/match"
	"ferry/status"
	"ferry/transform"
)

func newOverlayCommand() *cobra.Command {
	var f imageFlags
	var mapped string
	cmd := &cobra.Command{
		Use:   "overlay TRANSFORM SOURCE_STACK TARGET_IMAGE -o OUT.png",
		Short: "A colour composite of a target plane and the resampled source, for the eye",
		Long: `overlay resamples the source stack onto the target plane as resample does and
writes a colour composite: the target plane in sky blue, the resampled source
in orange (Okabe & Ito's colour-blind-safe palette), each contrast-stretched.
With --mapped (the output of map, or of match), the mapped cells whose 95 %
sphere meets the plane are marked with their ids, in a shape and colour per
status (diamond: ok or matched; square: ambiguous; plus: any other), and a
scale bar in µm is drawn. Voxel sizes, origins and --target-z as for resample.`,
		Args: exactArgs("TRANSFORM", "SOURCE_STACK", "TARGET_IMAGE"),
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
			job, err := f.load(cmd, args[0], args[1], args[2])
			if err != nil {
				return err
			}
			out, rep, err := job.resample(&f)
			if err != nil {
				return err
			}
			var marks []imaging.Mark
			if mapped != "" {
				if marks, err = readMarks(mapped, job, &f, cmd.ErrOrStderr()); err != nil {
					return err
				}
			}
			img := imaging.Overlay(job.plane, out, marks, imaging.OverlayOptions{PixelUM: job.grid.Voxel[0]})
			if err := cmd.Context().Err(); err != nil {
				return fmt.Errorf("%s not written: %w", f.out, err)
			}
			if err := imaging.WritePNGContext(cmd.Context(), f.out, img); err != nil {
				return err
			}
			fprintf(cmd.OutOrStdout(), "Overlay of %s, %d cells marked. Wrote %s\n", job.describe(rep), len(marks), f.out)
			fprintf(cmd.OutOrStdout(), "In the image: %s sky blue, %s orange, pale where both are bright%s.\n", job.planePath, job.stack.Path, markKey(marks))
			warnMostlyOutside(cmd, rep)
			return nil
		},
	}
	f.register(cmd)
	cmd.Flags().StringVar(&mapped, "mapped", "", "mapped cells to mark on the plane: the output of map, or of match (its cell_x… columns)")
	return cmd
}

// readMarks reads a map output and keeps the cells whose 95 % sphere meets
// the plane. The units of its positions are those its sidecar records;
// without one, those map writes: target voxels when the transform records
// them, else micrometres (a warning says so).
func readMarks(path string, job *resampleJob, f *imageFlags, stderr io.Writer) ([]imaging.Mark, error) {
	if isMatchesTable(path) {
		return readMatchMarks(path, job, f)
	}
	set, err := landmarks.ReadPoints(path, "mapped cells")
	if err != nil {
		return nil, err
	}
	if set.Dim != 3 {
		return nil, fmt.Errorf("%s: 2-D mapped cells cannot be marked on a plane of a 3-D volume (the file has no z column)", path)
	}
	statusCol, r95 := -1, -1
	for i, c := range set.ExtraColumns {
		switch strings.ToLower(c) {
		case "status":
			statusCol = i
		case "r95_um":
			r95 = i
		}
	}
	written, frame := job.file.Voxels.Target, register.FrameTarget
	if f.inverse {
		written, frame = job.file.Voxels.Source, register.FrameSource
	}
	written, note, err := register.PositionUnits(path, frame, written)
	if err != nil {
		return nil, err
	}
	if note != "" {
		fmt.Fprintf(stderr, "ferry: warning: %s\n", note)
	}
	pos := make([]transform.Vec, len(set.Points))
	reach := make([]float64, len(set.Points))
	states := make([]status.Status, len(set.Points))
	ids := make([]string, len(set.Points))
	for n, p := range set.Points {
		pos[n] = p.Pos
		ids[n] = p.ID
		if written != nil {
			for k := range 3 {
				pos[n][k] *= written[k]
			}
		}
		if statusCol >= 0 {
			states[n] = status.Status(strings.ToLower(strings.TrimSpace(p.Extra[statusCol])))
		}
		if r95 >= 0 && strings.TrimSpace(p.Extra[r95]) != "" {
			v, err := landmarks.ParseDecimal(p.Extra[r95])
			if err != nil {
				return nil, &landmarks.InputError{File: path, Line: p.Line, Column: set.ExtraColumns[r95], Msg: err.Error()}
			}
			reach[n] = max(v, 0)
		}
	}
	return imaging.PlaneMarks(pos, reach, states, ids, job.grid), nil
}

// isMatchesTable reports whether the CSV file at path has a p_match column
// in its header, as match's output has; any fault is left to the reader.
func isMatchesTable(path string) bool {
	header, err := landmarks.ReadHeader(path)
	if err != nil {
		return false
	}
	for _, h := range header {
		if strings.EqualFold(h, "p_match") {
			return true
		}
	}
	return false
}

// readMatchMarks reads match's output and keeps the cells whose 95 % sphere
// meets the plane, from the mapped cell coordinates it carries.
func readMatchMarks(path string, job *resampleJob, f *imageFlags) ([]imaging.Mark, error) {
	if f.inverse {
		return nil, fmt.Errorf("%s: a matches table holds target positions; with --inverse the plane is in the source", path)
	}
	ms, err := match.ReadMatchesTable(path)
	if err != nil {
		return nil, err
	}
	var pos []transform.Vec
	var reach []float64
	var states []status.Status
	var ids []string
	for _, m := range ms {
		if !m.CellPlaced {
			continue
		}
		p := m.Cell
		if m.InVoxels {
			if job.file.Voxels.Target == nil {
				return nil, fmt.Errorf("%s: the coordinates are in target voxels but the transform file records no target voxel size", path)
			}
			for k := range 3 {
				p[k] *= job.file.Voxels.Target[k]
			}
		}
		r := 0.0
		if m.R95 > 0 {
			r = m.R95
		}
		pos, reach = append(pos, p), append(reach, r)
		states, ids = append(states, m.Status), append(ids, m.ID)
	}
	if len(ms) > 0 && len(pos) == 0 {
		return nil, fmt.Errorf("%s: no row gives the mapped cell's position (no cell_x_um or cell_x_vox columns: a table from an older ferry match? run match again)", path)
	}
	return imaging.PlaneMarks(pos, reach, states, ids, job.grid), nil
}

// markKey says which colour marks which status, with the count of each,
// the good statuses first: "; marks: yellow ok (30), reddish purple
// extrapolated (26)", or "" without marks.
func markKey(marks []imaging.Mark) string {
	// The colours in the order of concern, and their names.
	colours := []imaging.Colour{imaging.Yellow, imaging.Orange, imaging.ReddishPurple, imaging.Vermillion, imaging.BluishGreen}
	names := []string{"yellow", "orange", "reddish purple", "vermillion", "bluish green"}
	rank := func(st status.Status) int { return slices.Index(colours, imaging.StatusColour(st)) }
	var order []status.Status
	count := map[status.Status]int{}
	for _, m := range marks {
		if count[m.Status] == 0 {
			order = append(order, m.Status)
		}
		count[m.Status]++
	}
	if len(order) == 0 {
		return ""
	}
	slices.SortStableFunc(order, func(a, b status.Status) int {
		return cmp.Or(cmp.Compare(rank(a), rank(b)), strings.Compare(string(a), string(b)))
	})
	parts := make([]string, len(order))
	for i, st := range order {
		label := string(st)
		if label == "" {
			label = "no status"
		}
		parts[i] = fmt.Sprintf("%s %s (%d)", names[rank(st)], label, count[st])
	}
	return "; marks: " + strings.Join(parts, ", ")
}
