package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/spf13/cobra"

	"ferry/landmarks"
	"ferry/progress"
	"ferry/register"
	"ferry/register/suggest"
	"ferry/transform"
)

func newSuggestCommand() *cobra.Command {
	var flags modelFlags
	var out, cellSD, where string
	var n int
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "suggest LANDMARKS CELLS -o SUGGESTIONS.csv",
		Short: "Where to pick the next landmarks so that the cells' uncertainty shrinks most",
		Long: `suggest fits the landmarks as fit does and chooses, one after another, the K
source positions where a new landmark would lower the cells' median 95 % radius
(r95, as map computes it) the most, each given the ones before it. How much a
landmark helps does not depend on where its target turns out to be, so the
choice needs no target. The model, its smoothing and the scale of its errors
are kept as fitted.

The candidates are the points of --where (for example vessel branch points seen
in vivo), or a regular grid over the box of the landmarks and the cells. Each
suggestion comes with the target position the current fit predicts for it and
that prediction's 95 % radius: where to look in the EM volume, and how far.
See docs/suggest.md.`,
		Args: exactArgs("LANDMARKS", "CELLS"),
		RunE: func(cmd *cobra.Command, args []string) error {
			inputs := append([]string(nil), args...)
			if where != "" {
				inputs = append(inputs, where)
			}
			if err := requireOutput(out, inputs...); err != nil {
				return err
			}
			if n < 1 {
				return fmt.Errorf("--n: want a positive number of landmarks, got %d", n)
			}
			job, a, err := flags.assessForFit(cmd, args[0], summaryWriter(cmd, out))
			if err != nil {
				return err
			}
			file := register.NewRegistration(job.problem, a, job.settings, register.Provenance{})
			cells, pos, err := register.ReadCells(args[1], "cells", file, false)
			if err != nil {
				return err
			}
			sd, err := optionalTriple("--cell-sd", cellSD, cells.Dim)
			if err != nil {
				return err
			}
			opt := suggest.Options{N: n, CellSD: sd, Progress: progress.Terminal(os.Stderr)}
			var whereSet *landmarks.PointSet
			if where != "" {
				if whereSet, opt.Candidates, err = register.ReadCells(where, "candidate locations", file, false); err != nil {
					return err
				}
			}
			// The provenance of the files as their readers read them.
			read := []register.Input{register.PairsInput(job.set), register.PointsInput(cells)}
			if whereSet != nil {
				read = append(read, register.PointsInput(whereSet))
			}
			prov := register.Provenance{Command: "suggest", Inputs: read, Flags: setFlags(cmd)}
			file.Check.Provenance = prov.Line()
			res, err := suggest.Suggest(file, pos, opt)
			if err != nil {
				return err
			}
			output := suggest.Output{Provenance: prov, SourceVoxel: file.Voxels.Source, TargetVoxel: file.Voxels.Target, Where: whereSet}
			if out == stdoutName && asJSON {
				return fmt.Errorf("-o - with --json: both would go to standard output; give -o a file name")
			}
			if err := writeTable(cmd, out, func(ctx context.Context, path string) error {
				return res.WriteTable(ctx, path, output)
			}, func(w io.Writer) error {
				return res.WriteCSV(w, output)
			}); err != nil {
				return err
			}
			stderr := cmd.ErrOrStderr()
			if ids := a.Flagged(); len(ids) > 0 {
				fmt.Fprintf(stderr, "ferry: warning: %d landmark(s) look wrong and are still in the fit: %s. Run ferry check, then correct them or use --exclude %s\n",
					len(ids), strings.Join(ids, ", "), strings.Join(ids, ","))
			}
			if len(res.Suggestions) < n {
				fmt.Fprintf(stderr, "ferry: warning: %d suggestion(s), not %d: no other candidate location adds anything\n", len(res.Suggestions), n)
			}
			if asJSON {
				return writeJSON(cmd.OutOrStdout(), res.JSON(output))
			}
			writeSuggestions(summaryWriter(cmd, out), res, output, outputName(out))
			return nil
		},
	}
	flags.register(cmd)
	flags.registerKeep(cmd)
	fl := cmd.Flags()
	fl.StringVarP(&out, "output", "o", "", "suggestions to write (CSV)")
	fl.IntVar(&n, "n", suggest.DefaultN, "how many landmarks to suggest")
	fl.StringVar(&where, "where", "", "points file (id,x,y,z in source space) of the only locations to choose from")
	fl.StringVar(&cellSD, "cell-sd", "", "localisation error of the cells' own coordinates X,Y,Z in µm (one standard deviation)")
	fl.BoolVar(&asJSON, "json", false, "also print the suggestions as one JSON object on stdout")
	return cmd
}

// writeSuggestions prints what suggest found, for the eye.
func writeSuggestions(w io.Writer, res *suggest.Result, out suggest.Output, path string) {
	model := string(res.Model)
	if res.Model == transform.TPS {
		model = fmt.Sprintf("tps, smoothing %.4g", res.Smoothing)
	}
	where := fmt.Sprintf("%d grid nodes %.2f µm apart over the landmarks and cells", len(res.Candidates), res.GridSpacing)
	if res.GridSpacing == 0 {
		where = fmt.Sprintf("%d given locations", len(res.Candidates))
	}
	fmt.Fprintf(w, "Model %s, kept fixed. %d cells; candidates: %s.\n", model, len(res.CellR95Before), where)
	if res.SearchCells < len(res.CellR95Before) {
		fmt.Fprintf(w, "The search judged every %d-th cell (%d of them); the radii below are over all cells.\n",
			(len(res.CellR95Before)+res.SearchCells-1)/res.SearchCells, res.SearchCells)
	}
	fmt.Fprintf(w, "Median r95 of the cells now: %.2f µm.\n", res.R95Before)
	if len(res.Suggestions) == 0 {
		fmt.Fprintf(w, "No location lowers it. Wrote %s and %s\n", path, register.SidecarPath(path))
		return
	}
	srcUnit, tgtUnit := "µm", "µm"
	if out.SourceVoxel != nil {
		srcUnit = "voxels"
	}
	if out.TargetVoxel != nil {
		tgtUnit = "voxels"
	}
	fmt.Fprintf(w, "%4s  %-28s  %-30s  %12s  %8s  %12s  %s\n", "rank", "source ("+srcUnit+")", "predicted target ("+tgtUnit+")", "r95 after µm", "gain µm", "target r95 µm", "status")
	js := res.JSON(out)
	for _, s := range js.Suggestions {
		src := fmt.Sprintf("%.1f, %.1f", s.X, s.Y)
		dst := fmt.Sprintf("%.1f, %.1f", s.TargetX, s.TargetY)
		if s.Z != nil {
			src += fmt.Sprintf(", %.1f", *s.Z)
			dst += fmt.Sprintf(", %.1f", *s.TargetZ)
		}
		if s.WhereID != nil {
			src = *s.WhereID + ": " + src
		}
		fmt.Fprintf(w, "%4d  %-28s  %-30s  %12.2f  %8.3f  %12.2f  %s\n", s.Rank, src, dst, s.R95AfterUM, s.GainUM, s.TargetR95UM, s.Status)
	}
	fmt.Fprintf(w, "Wrote %s and %s\n", path, register.SidecarPath(path))
}
