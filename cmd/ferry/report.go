package main

import (
	"fmt"

	"github.com/spf13/cobra"

	"ferry/register"
	"ferry/register/report"
)

func newReportCommand() *cobra.Command {
	var flags modelFlags
	var out, transformPath, mappedPath, matchesPath string
	cmd := &cobra.Command{
		Use:   "report LANDMARKS -o REPORT.html [--transform T.json] [--mapped MAPPED.csv] [--matches MATCHES.csv]",
		Short: "Write the quality report: one self-contained HTML page to read before tracing",
		Long: `report writes one HTML page that opens offline: the leave-one-out error of
every landmark against its predicted 95 % radius with the flags and their
reasons, the error vectors in the projections of the source volume, the
predicted 95 % radius over the imaged field with the landmarks and (with
--mapped) the cells on it, the calibration of the predicted errors, the models
compared and (with --matches) the ambiguous matches.

With --transform the page shows that transform and the check made when it was
fitted; LANDMARKS must be the file it was fitted from, and the model, smoothing,
exclusions, voxel sizes and picking errors are the transform file's. Without
it the landmarks are checked and fitted here with the flags given, as fit does.`,
		Args: exactArgs("LANDMARKS"),
		RunE: func(cmd *cobra.Command, args []string) error {
			inputs := []string{args[0]}
			for _, p := range []string{transformPath, mappedPath, matchesPath} {
				if p != "" {
					inputs = append(inputs, p)
				}
			}
			if err := refuseStdout(out, "an HTML page"); err != nil {
				return err
			}
			if err := requireOutput(out, inputs...); err != nil {
				return err
			}
			in := &report.Input{LandmarkFile: args[0], TransformFile: transformPath, CellsFile: mappedPath, MatchesFile: matchesPath}
			var err error
			if transformPath != "" {
				err = reportFromTransform(cmd, in, args[0], transformPath)
			} else {
				err = reportFromLandmarks(cmd, in, &flags, args[0])
			}
			if err != nil {
				return err
			}
			in.Provenance.Command, in.Provenance.Flags = "report", setFlags(cmd)
			if err := report.AddTables(in, mappedPath, matchesPath); err != nil {
				return err
			}
			page, err := report.New(in)
			if err != nil {
				return err
			}
			if err := page.WriteFile(cmd.Context(), out); err != nil {
				return err
			}
			for _, w := range page.Warnings {
				fmt.Fprintf(cmd.ErrOrStderr(), "ferry: warning: %s\n", w)
			}
			fmt.Fprintf(cmd.OutOrStdout(), "Wrote %s: %d landmarks, %d flagged, %d figures.\n",
				out, len(in.Check.Landmarks), len(in.Check.Flagged), page.Figures())
			return nil
		},
	}
	flags.register(cmd)
	flags.registerKeep(cmd)
	fl := cmd.Flags()
	fl.StringVarP(&out, "output", "o", "", "report to write (HTML)")
	fl.StringVar(&transformPath, "transform", "", "transform file to report on (default: fit one from LANDMARKS)")
	fl.StringVar(&mappedPath, "mapped", "", "mapped cells from ferry map, drawn on the uncertainty map")
	fl.StringVar(&matchesPath, "matches", "", "matches from ferry match, summarised with the ambiguous cells listed")
	return cmd
}

// reportFromLandmarks checks and fits the landmarks with the flags, as fit
// does, for a report without a transform file.
func reportFromLandmarks(cmd *cobra.Command, in *report.Input, flags *modelFlags, path string) error {
	job, a, err := flags.assessForFit(cmd, path, cmd.OutOrStdout())
	if err != nil {
		return err
	}
	in.Provenance.Inputs = []register.Input{register.PairsInput(job.set)}
	prov := register.Provenance{Command: "report", Inputs: in.Provenance.Inputs, Flags: setFlags(cmd)}
	file := register.NewRegistration(job.problem, a, job.settings, prov)
	check := a.JSON()
	in.Check, in.Source, in.Excluded, in.Transform = &check, job.problem.Source, job.exclude, file
	return nil
}

// reportFromTransform reports on a transform file with the check it keeps.
func reportFromTransform(cmd *cobra.Command, in *report.Input, path, transformPath string) error {
	for _, name := range []string{"model", "smoothing", "exclude", "source-voxel", "target-voxel", "source-sd", "target-sd", "no-mirror"} {
		if cmd.Flags().Changed(name) {
			return fmt.Errorf("--%s: the transform file %s fixes it; leave the flag out, or leave out --transform to check the landmarks with it", name, transformPath)
		}
	}
	return report.FromTransform(in, path, transformPath)
}
