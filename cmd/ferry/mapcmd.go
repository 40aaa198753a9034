package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"

	"github.com/spf13/cobra"

	"ferry/landmarks"
	"ferry/outfile"
	"ferry/register"
	"ferry/status"
	"ferry/transform"
)

func newMapCommand() *cobra.Command {
	var out, cellSD string
	var inverse bool
	cmd := &cobra.Command{
		Use:   "map TRANSFORM CELLS -o MAPPED.csv",
		Short: "Map cells through the transform with their uncertainty",
		Long: `map writes each cell's mapped position with its standard deviation per axis,
the radius r95_um of the sphere that holds the true position with 95 %
probability, and a status (ok, or a word saying why the point deserves care).
With --inverse the cells are in the target and are mapped back to the source.`,
		Args: exactArgs("TRANSFORM", "CELLS"),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := requireOutput(out, args...); err != nil {
				return err
			}
			job, err := loadMapping(args[0], args[1], cellSD, inverse)
			if err != nil {
				return err
			}
			for _, warning := range job.Mapper.Warnings() {
				fmt.Fprintf(cmd.ErrOrStderr(), "Warning from %s: %s\n", args[0], warning)
			}
			cells := job.Cells
			mapped, err := job.Mapper.MapAllContext(cmd.Context(), job.Pos, job.cellSD, inverse)
			if err != nil {
				return fmt.Errorf("%s not written: %w", outputName(out), err)
			}
			frame, voxel := job.Frame()
			prov := job.Provenance("map", setFlags(cmd))
			layout := register.NewMappedLayout(cells, frame, voxel)
			if err := writeTable(cmd, out, func(ctx context.Context, path string) error {
				return register.WriteMappedTable(ctx, path, prov, cells, mapped, frame, voxel)
			}, func(w io.Writer) error {
				return register.WriteMapped(w, cells, mapped, layout, voxel)
			}); err != nil {
				return err
			}
			counts := map[status.Status]int{}
			for _, m := range mapped {
				counts[m.Status]++
			}
			wrote := outputName(out)
			if out != stdoutName && !outfile.IsStream(out) {
				wrote += " and " + register.SidecarPath(out)
			}
			fmt.Fprintf(summaryWriter(cmd, out), "Mapped %d cells: %s. Wrote %s\n", len(mapped), register.FormatCounts(counts), wrote)
			return nil
		},
	}
	cmd.Flags().StringVarP(&out, "output", "o", "", "mapped cells to write (CSV)")
	cmd.Flags().StringVar(&cellSD, "cell-sd", "", "localisation error of the cells' own coordinates X,Y,Z in µm (one standard deviation)")
	cmd.Flags().BoolVar(&inverse, "inverse", false, "the cells are in the target: map them back to the source")
	return cmd
}

func optionalTriple(name, value string, dim int) (*transform.Vec, error) {
	if value == "" {
		return nil, nil
	}
	v, err := landmarks.ParseTriple(name, value, dim)
	if err != nil {
		return nil, err
	}
	return &v, nil
}

func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}
