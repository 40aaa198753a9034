package main

import (
	"os"

	"github.com/spf13/cobra"

	"ferry/register/demo"
	"ferry/simulate"
)

func newDemoCommand() *cobra.Command {
	var seed uint64
	cmd := &cobra.Command{
		Use:   "demo [DIR]",
		Short: "Run the whole job on the built-in invented scenario and print what it found",
		Long: `demo simulates a block of cortex with known truth into DIR (default
./ferry-demo), checks the landmarks, fits the transform without the flagged
ones, maps and matches the imaged cells, writes every file, and compares the
results with the truth.`,
		Args: maxArgs("DIR"),
		RunE: func(cmd *cobra.Command, args []string) error {
			dir := "ferry-demo"
			if len(args) == 1 {
				dir = args[0]
			}
			o := demo.Options{Dir: dir, Seed: seed}
			if demo.IsTerminal(os.Stderr) {
				o.Progress = cmd.ErrOrStderr()
			}
			out, err := demo.Run(cmd.Context(), o)
			if err != nil {
				return err
			}
			out.Print(cmd.OutOrStdout())
			return nil
		},
	}
	cmd.Flags().Uint64Var(&seed, "seed", 1, "seed of the scenario")
	return cmd
}

func newSimulateCommand() *cobra.Command {
	var seed uint64
	cmd := &cobra.Command{
		Use:   "simulate DIR",
		Short: "Write a synthetic scenario with known truth",
		Long: `simulate writes an invented block of cortex: landmark pairs, imaged cells,
EM candidate nuclei, and the truth (true positions, true matches, which
landmarks were spoiled). See docs/simulation.md.`,
		Args: exactArgs("DIR"),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := simulate.CheckFolder(args[0], simulate.FileNames()...); err != nil {
				return err
			}
			s, err := simulate.Generate(simulate.DefaultParams(), seed)
			if err != nil {
				return err
			}
			files, err := s.WriteContext(cmd.Context(), args[0])
			if err != nil {
				return err
			}
			ip := s.DefaultImageParams()
			stack, plane, err := s.WriteImagesContext(cmd.Context(), args[0], ip)
			if err != nil {
				return err
			}
			w := cmd.OutOrStdout()
			fprintf(w, "Wrote a scenario (seed %d) of %d landmarks, %d cells and %d candidates:\n", seed, len(s.Landmarks), len(s.Cells), len(s.Candidates))
			for _, p := range []string{files.Landmarks, files.Cells, files.Candidates, files.TruthCells, files.TruthLandmarks, files.Scenario} {
				fprintf(w, "  %s\n", p)
			}
			fprintf(w, "  %s (in vivo stack, voxels %g × %g × %g µm)\n", stack, ip.SourceVoxelUM[0], ip.SourceVoxelUM[1], ip.SourceVoxelUM[2])
			v := ip.TargetVoxelUM
			fprintf(w, "  %s (one EM section at z = %g µm, page %d of the EM volume's %g × %g × %g µm voxels)\n", plane, float64(ip.TargetZ)*v[2], ip.TargetZ, v[0], v[1], v[2])
			return nil
		},
	}
	cmd.Flags().Uint64Var(&seed, "seed", 1, "seed of the scenario")
	return cmd
}
