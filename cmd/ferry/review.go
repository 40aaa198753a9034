package main

import (
	"errors"
	"fmt"
	"net"
	"path/filepath"
	"syscall"

	"github.com/spf13/cobra"

	"ferry/imaging"
	"ferry/landmarks"
	"ferry/register/match"
	"ferry/register/review"
	"ferry/transform"
)

func newReviewCommand() *cobra.Command {
	var tPath, cellsPath, candsPath, srcStack, dstStack, decisions, listen string
	var srcVoxel, dstVoxel, dstOffset, cellSD string
	var candidateSD float64
	cmd := &cobra.Command{
		Use:   "review MATCHES.csv --transform T.json --cells CELLS.csv --candidates CANDIDATES.csv --source-stack STACK --target-stack STACK",
		Short: "A local page for confirming matches by eye; each decision is saved at once",
		Long: `review serves a page on this computer (nothing is fetched from the network)
that shows one cell at a time, ambiguous ones first, then by the probability
of the proposed choice, lowest first: the in vivo neighbourhood resampled into
the EM frame beside the EM neighbourhood, in a plane through the cell and an
orthogonal slice, with the cell's 95 % radius, the candidates in reach with
their probabilities and the neighbouring cells. Each decision (accept, another
candidate, no counterpart) is written at once to the decisions file; a later
review with the same file resumes. Ctrl-C stops it. See docs/review.md.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			for _, f := range []struct{ name, value string }{{"--transform", tPath}, {"--cells", cellsPath}, {"--candidates", candsPath},
				{"--source-stack", srcStack}, {"--target-stack", dstStack}} {
				if f.value == "" {
					return fmt.Errorf("%s is required", f.name)
				}
			}
			if decisions == "" {
				decisions = filepath.Join(filepath.Dir(args[0]), "decisions.csv")
			}
			if err := outputNotInput(decisions, args[0], tPath, cellsPath, candsPath, srcStack, dstStack); err != nil {
				return err
			}
			ms, err := match.ReadMatchesTable(args[0])
			if err != nil {
				return err
			}
			job, err := loadMapping(tPath, cellsPath, cellSD, false)
			if err != nil {
				return err
			}
			if job.Cells.Dim != 3 {
				return fmt.Errorf("%s: review needs 3-D cells and stacks", cellsPath)
			}
			cands, candPos, err := job.Candidates(candsPath)
			if err != nil {
				return err
			}
			src, err := imaging.OpenVolume(srcStack)
			if err != nil {
				return err
			}
			defer src.Close()
			dst, err := imaging.OpenVolume(dstStack)
			if err != nil {
				return err
			}
			defer dst.Close()
			// Each stack's voxel size as resample settles it: the flag, else
			// what the file records, else the transform file's; the EM
			// stack's offset likewise from --target-offset or its file.
			sv, err := settleVoxel(src, "--source-voxel", srcVoxel, job.Registration.Voxels.Source)
			if err != nil {
				return err
			}
			dstGeom, err := settleGeometry(dst, "--target-voxel", dstVoxel, job.Registration.Voxels.Target)
			if err != nil {
				return err
			}
			tv, offset := dstGeom.VoxelUM, dstGeom.OriginUM
			if dstOffset != "" {
				if offset, err = landmarks.ParsePosition("--target-offset", dstOffset, 3); err != nil {
					return err
				}
			}
			s, err := review.NewSession(review.Inputs{
				Transform: job.Registration, Mapper: job.Mapper, Cells: job.Cells, CellPos: job.Pos, CellSD: job.cellSD,
				Candidates: cands, CandidatePos: candPos, Matches: ms, MatchesPath: args[0],
				MatchOptions: match.Options{CandidateSD: candidateSD},
				Source:       src, Target: dst, SourceVoxel: sv, TargetVoxel: tv, TargetOffset: offset,
				DecisionsPath: decisions,
			})
			if err != nil {
				return err
			}
			ln, err := net.Listen("tcp", listen)
			if err != nil {
				if errors.Is(err, syscall.EADDRINUSE) {
					return fmt.Errorf("--listen %s: the port is in use; choose another, e.g. --listen 127.0.0.1:0 for any free one", listen)
				}
				return fmt.Errorf("--listen %s: %w", listen, err)
			}
			st := s.State()
			fmt.Fprintf(cmd.OutOrStdout(), "Review of %d cells (%d decided) at http://%s/ — decisions go to %s. Ctrl-C stops.\n",
				st.Total, st.Decided, ln.Addr(), decisions)
			if err := review.Serve(cmd.Context(), ln, s); err != nil {
				return err
			}
			fmt.Fprintf(cmd.OutOrStdout(), "Stopped. %d of %d cells decided, saved in %s\n", s.State().Decided, st.Total, decisions)
			return nil
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&tPath, "transform", "", "transform file (from fit)")
	fl.StringVar(&cellsPath, "cells", "", "cells (source)")
	fl.StringVar(&candsPath, "candidates", "", "candidates (target)")
	fl.StringVar(&srcStack, "source-stack", "", "in vivo stack: multi-page TIFF or a folder of planes")
	fl.StringVar(&dstStack, "target-stack", "", "EM stack around the imaged field: multi-page TIFF or a folder of planes")
	fl.StringVar(&decisions, "decisions", "", "decisions file to write, and to resume from when it exists (default: decisions.csv beside MATCHES.csv)")
	fl.StringVar(&listen, "listen", "127.0.0.1:8765", "address to serve on")
	fl.StringVar(&srcVoxel, "source-voxel", "", "source stack voxel size X,Y,Z in µm (default: from the transform file)")
	fl.StringVar(&dstVoxel, "target-voxel", "", "target stack voxel size X,Y,Z in µm (default: from the transform file)")
	fl.StringVar(&dstOffset, "target-offset", "", "EM-frame position X,Y,Z in µm of the target stack's voxel (0,0,0) (default 0,0,0)")
	fl.StringVar(&cellSD, "cell-sd", "", "localisation error of the cells X,Y,Z in µm, as for match")
	fl.Float64Var(&candidateSD, "candidate-sd", match.DefaultCandidateSD, "spread of a candidate about its cell's soma centre in µm, as for match")
	return cmd
}

// outputNotInput refuses a decisions file that is one of the inputs.
func outputNotInput(out string, inputs ...string) error {
	return requireOutput(out, inputs...)
}

// settleGeometry is the geometry of the stack v: the voxel size of the
// flag name (value, when given), else what the file records, else the
// transform file's (recorded), as imaging.Settle decides it.
func settleGeometry(v *imaging.Volume, name, value string, recorded *transform.Vec) (imaging.Geometry, error) {
	in := imaging.Given{VoxelFlag: name, Fallback: recorded}
	if value != "" {
		vox, err := landmarks.ParseTriple(name, value, 3)
		if err != nil {
			return imaging.Geometry{}, err
		}
		in.Voxel = &vox
	}
	return imaging.Settle(v.Header(), in)
}

// settleVoxel is settleGeometry's voxel size.
func settleVoxel(v *imaging.Volume, name, value string, recorded *transform.Vec) (transform.Vec, error) {
	g, err := settleGeometry(v, name, value, recorded)
	return g.VoxelUM, err
}
