package main

import (
	"fmt"
	"math"
	"strings"

	"github.com/spf13/cobra"

	"ferry/landmarks"
	"ferry/register"
	"ferry/register/match"
)

func newFitCommand() *cobra.Command {
	var flags modelFlags
	var out, decisions, cellsPath, candsPath string
	var decisionInputs []register.Input
	cmd := &cobra.Command{
		Use:   "fit LANDMARKS -o TRANSFORM.json",
		Short: "Fit the transform from landmark pairs and write the transform file",
		Long: `fit compares the models by their exact leave-one-out errors, chooses one (or
fits the one given with --model), and writes the transform file with the
leave-one-out summary and the uncertainty model that map and match use.
With --decisions (and --cells, --candidates), the pairs accepted in review
join the landmarks as somata of their own kind (decided_soma, with their own
noise): the cell's source position and the candidate's target position.`,
		Args: exactArgs("LANDMARKS"),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := requireOutput(out, args[0], decisions, cellsPath, candsPath); err != nil {
				return err
			}
			if decisions != "" {
				if cellsPath == "" || candsPath == "" {
					return fmt.Errorf("--decisions: give the cells and candidates the decisions name with --cells and --candidates")
				}
				flags.addPairs = func(set *landmarks.PairSet) error {
					cells, err := landmarks.ReadPoints(cellsPath, "cells")
					if err != nil {
						return err
					}
					cands, err := landmarks.ReadPoints(candsPath, "candidates")
					if err != nil {
						return err
					}
					d, sum, err := readDecisions(decisions, cells, cands)
					if err != nil {
						return err
					}
					decisionInputs = []register.Input{{Path: decisions, SHA256: sum}, register.PointsInput(cells), register.PointsInput(cands)}
					return match.AddDecidedLandmarks(set, d, cells, cands)
				}
			}
			job, a, err := flags.assessForFit(cmd, args[0], summaryWriter(cmd, out))
			if err != nil {
				if cmd.Context().Err() != nil {
					return fmt.Errorf("%s not written: %w", out, cmd.Context().Err())
				}
				return err
			}
			// The hash of the bytes the reader read, not of the file read
			// again: the same unless it changed in between, and then the
			// reader's is the true one.
			inputs := append([]register.Input{register.PairsInput(job.set)}, decisionInputs...)
			prov := register.Provenance{Command: "fit", Inputs: inputs, Flags: setFlags(cmd)}
			file := register.NewRegistration(job.problem, a, job.settings, prov)
			data, err := file.Marshal()
			if err != nil {
				return err
			}
			if err := writeOutputBytes(cmd, out, data); err != nil {
				return err
			}
			w := summaryWriter(cmd, out)
			register.WriteComparison(w, a)
			fmt.Fprintf(w, "Leave-one-out error of the %s model: RMS %.2f µm, max %.2f µm over %d landmarks.\n",
				a.Chosen, a.JSON().RMSUM, a.JSON().MaxUM, len(a.Landmarks))
			if ids := a.Flagged(); len(ids) > 0 {
				fmt.Fprintf(w, "Warning: %d landmark(s) look wrong and are still in the fit (--keep-flagged): %s. Run ferry check, then correct them or refit without --keep-flagged\n",
					len(ids), strings.Join(ids, ", "))
			}
			if u := a.Unresolved(0); u != "" {
				fmt.Fprintf(w, "Warning: %s\n", u)
			}
			fmt.Fprintf(w, "Wrote %s\n", outputName(out))
			return nil
		},
	}
	flags.register(cmd)
	flags.registerKeep(cmd)
	cmd.Flags().StringVarP(&out, "output", "o", "", "transform file to write (JSON)")
	cmd.Flags().StringVar(&decisions, "decisions", "", "decisions file from review: its accepted pairs join the landmarks (needs --cells and --candidates)")
	cmd.Flags().StringVar(&cellsPath, "cells", "", "the cells the decisions name (source, in the landmarks' units)")
	cmd.Flags().StringVar(&candsPath, "candidates", "", "the candidates the decisions name (target, in the landmarks' units)")
	return cmd
}

func newCheckCommand() *cobra.Command {
	var flags modelFlags
	var maxError float64
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "check LANDMARKS",
		Short: "The leave-one-out check of the landmarks before tracing starts",
		Long: `check predicts every landmark from all the others, flags the ones that look
wrong, and reports the errors per landmark and per kind with the calibration of
the predicted 95 % radii. Exit status 3 when a landmark is flagged or a
leave-one-out error exceeds --max-error, and when the median leave-one-out
error exceeds a soma's diameter (10 µm): the registration cannot resolve cells.`,
		Args: exactArgs("LANDMARKS"),
		RunE: func(cmd *cobra.Command, args []string) error {
			if cmd.Flags().Changed("max-error") && !(maxError > 0 && !math.IsInf(maxError, 1)) {
				return fmt.Errorf("--max-error: want a positive finite number of micrometres, got %v", maxError)
			}
			job, a, err := flags.assess(cmd, args[0])
			if err != nil {
				return err
			}
			w := cmd.OutOrStdout()
			if asJSON {
				inputs := []register.Input{register.PairsInput(job.set)}
				c := a.JSON()
				c.Provenance = register.Provenance{Command: "check", Inputs: inputs, Flags: setFlags(cmd)}.Line()
				if err := writeJSON(w, c); err != nil {
					return err
				}
			} else {
				register.WriteComparison(w, a)
				fmt.Fprintln(w)
				register.WriteCheckTable(w, a)
			}
			failed := len(a.Flagged()) > 0
			if maxError > 0 && a.MaxLOO() > maxError {
				failed = true
				if !asJSON {
					fmt.Fprintf(w, "A leave-one-out error of %.2f µm exceeds --max-error %.2f µm.\n", a.MaxLOO(), maxError)
				}
			}
			if u := a.Unresolved(0); u != "" {
				failed = true
				if !asJSON {
					fmt.Fprintln(w, u)
				}
			}
			if failed {
				return errQuality
			}
			return nil
		},
	}
	flags.register(cmd)
	newDecimalFlag(cmd.Flags(), &maxError, "max-error", 0, "fail (exit 3) when a leave-one-out error exceeds this many µm")
	cmd.Flags().BoolVar(&asJSON, "json", false, "print one JSON object instead of the table")
	return cmd
}
