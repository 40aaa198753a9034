package main

import (
	"fmt"
	"io"

	"github.com/spf13/cobra"

	"ferry/register"
)

func newRootCommand(stdout, stderr io.Writer) *cobra.Command {
	root := &cobra.Command{
		Use:   "ferry",
		Short: "Register in vivo two-photon volumes to EM volumes and find each imaged cell",
		Long: `ferry fits a transform from landmark pairs picked in an in vivo (source) volume
and an electron-microscopy (target) volume, checks it by leave-one-out before
tracing starts, maps imaged cells into the target with a 95 % radius each, and
matches them to candidate somata. Coordinates are micrometres unless voxel
sizes are given; every error is in micrometres.

Results are for research and must be checked by eye before tracing.`,
		// A word that names no command is a usage mistake (rootArgs); with
		// none, ferry prints its help.
		Args:                       rootArgs,
		SuggestionsMinimumDistance: 2,
		RunE:                       func(cmd *cobra.Command, _ []string) error { return cmd.Help() },
		SilenceUsage:               true,
		SilenceErrors:              true,
		Version:                    register.Version,
	}
	// --version prints what the version command prints.
	root.SetVersionTemplate("ferry {{.Version}}\n")
	// A flag cobra cannot parse is a usage mistake like a missing argument:
	// the message names it and shows the command's usage line.
	root.SetFlagErrorFunc(flagError)
	root.SetOut(stdout)
	root.SetErr(stderr)
	root.AddCommand(
		newVersionCommand(),
		newFitCommand(),
		newCheckCommand(),
		newMapCommand(),
		newMatchCommand(),
		newReviewCommand(),
		newReportCommand(),
		newSimulateCommand(),
		newDemoCommand(),
		newResampleCommand(),
		newOverlayCommand(),
		newWarpCommand(),
		newSuggestCommand(),
		newExportCommand(),
		newRefineCommand(),
	)
	return root
}

func newVersionCommand() *cobra.Command {
	return &cobra.Command{
		Use:   "version",
		Short: "Print the program version",
		Args:  noArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			fmt.Fprintf(cmd.OutOrStdout(), "ferry %s\n", register.Version)
			return nil
		},
	}
}

func fprintf(w io.Writer, format string, a ...any) { fmt.Fprintf(w, format, a...) }
