package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"

	"github.com/spf13/cobra"

	"ferry/landmarks"
	"ferry/outfile"
	"ferry/progress"
	"ferry/register"
	"ferry/register/match"
	"ferry/register/refine"
)

func newRefineCommand() *cobra.Command {
	var flags modelFlags
	var out, cellSD, somataPath, pairsPath, decisionsPath string
	var candidateSD, minP float64
	var maxNodes int
	cmd := &cobra.Command{
		Use:   "refine LANDMARKS CELLS CANDIDATES -o REFINED.json",
		Short: "Fit the landmarks, then refine the transform with the somata and their EM counterparts",
		Long: `refine fits the landmarks as fit does, then refines the transform with the
correspondences between the in vivo somata (the cells, plus --somata) and the
candidates: round by round, the somata are matched under the current transform
and its uncertainty as match matches them, the clear pairs (posterior
probability at least --min-p, lowered to it over the first rounds) join the
landmarks as soma pseudo-landmarks, and the thin-plate spline is refitted with
its smoothing chosen by exact leave-one-out, until the pairs no longer change.

It writes an ordinary transform file, which map, match, report, resample,
overlay and suggest take as they take a fitted one. A cell whose pair is a
node of the spline is judged by map and match without its own pair. The
landmarks' leave-one-out errors before and after are printed; exit status 3,
and nothing written, when the refinement predicts them worse. See
docs/methods.md for the method.

With --decisions (a decisions file from review, on the cells), the pairs
accepted in review join the landmarks as somata of their own kind
(decided_soma, with their own noise), as fit --decisions adds them, and are
not matched again; a rejected pair is never paired, and a cell with no
counterpart never pairs.`,
		Args: cobra.ExactArgs(3),
		RunE: func(cmd *cobra.Command, args []string) error {
			inputs := append([]string(nil), args...)
			if somataPath != "" {
				inputs = append(inputs, somataPath)
			}
			if decisionsPath != "" {
				inputs = append(inputs, decisionsPath)
			}
			if err := requireOutput(out, inputs...); err != nil {
				return err
			}
			if pairsPath != "" {
				if err := outfile.NotAnInput(pairsPath, append(inputs, out)...); err != nil {
					return err
				}
			}
			if !(candidateSD > 0) || math.IsInf(candidateSD, 0) {
				return fmt.Errorf("--candidate-sd: want a positive number of micrometres, got %v", candidateSD)
			}
			if !(minP > 0.5 && minP < 1) {
				return fmt.Errorf("--min-p: want a probability between 0.5 and 1, got %v", minP)
			}
			if maxNodes < 1 {
				return fmt.Errorf("--max-nodes: want a positive number of nodes, got %d", maxNodes)
			}
			// The decisions name the cells and candidates as read, in the
			// landmarks' units: the accepted pairs join the landmark set
			// before it is prepared, as fit --decisions adds them.
			var decided *match.Decisions
			var decisionsInput register.Input
			var decidedCells, decidedCands string // the hashes the decisions were resolved against
			if decisionsPath != "" {
				flags.addPairs = func(set *landmarks.PairSet) error {
					cells, err := landmarks.ReadPoints(args[1], "cells")
					if err != nil {
						return err
					}
					cands, err := landmarks.ReadPoints(args[2], "candidates")
					if err != nil {
						return err
					}
					d, sum, err := readDecisions(decisionsPath, cells, cands)
					if err != nil {
						return err
					}
					decided, decisionsInput = d, register.Input{Path: decisionsPath, SHA256: sum}
					decidedCells, decidedCands = cells.SHA256, cands.SHA256
					return match.AddDecidedLandmarks(set, d, cells, cands)
				}
			}
			job, a, err := flags.assessForFit(cmd, args[0], summaryWriter(cmd, out))
			if err != nil {
				return err
			}
			base := register.NewRegistration(job.problem, a, job.settings, register.Provenance{Command: "refine", Inputs: []register.Input{register.PairsInput(job.set)}, Flags: setFlags(cmd)})
			cells, cellPos, err := register.ReadCells(args[1], "cells", base, false)
			if err != nil {
				return err
			}
			cands, candPos, err := register.ReadCells(args[2], "candidates", base, true)
			if err != nil {
				return err
			}
			sd, err := optionalTriple("--cell-sd", cellSD, cells.Dim)
			if err != nil {
				return err
			}
			if decided != nil && (cells.SHA256 != decidedCells || cands.SHA256 != decidedCands) {
				return fmt.Errorf("%s or %s changed while refine read it; run refine again", args[1], args[2])
			}
			// The cells come first among the somata, so the decisions'
			// cell indices are the somata's.
			in := refine.Input{Landmarks: job.problem, Assessment: a,
				Somata: cellPos, SomaIDs: pointIDs(cells), Candidates: candPos, CandidateIDs: pointIDs(cands),
				Decisions: decided}
			provInputs := []register.Input{register.PairsInput(job.set),
				register.PointsInput(cells), register.PointsInput(cands)}
			if decided != nil {
				provInputs = append(provInputs, decisionsInput)
			}
			if somataPath != "" {
				somata, somaPos, err := register.ReadCells(somataPath, "somata", base, false)
				if err != nil {
					return err
				}
				if err := distinctIDs(cells, somata); err != nil {
					return err
				}
				in.Somata = append(in.Somata, somaPos...)
				in.SomaIDs = append(in.SomaIDs, pointIDs(somata)...)
				provInputs = append(provInputs, register.PointsInput(somata))
			}
			opt := refine.Options{Settings: job.settings, CellSD: sd, CandidateSD: candidateSD, MinP: minP,
				MaxNodes: maxNodes, Progress: progress.Terminal(os.Stderr)}
			res, err := refine.Refine(in, opt)
			if err != nil {
				return err
			}
			prov := register.Provenance{Command: "refine", Inputs: provInputs, Flags: setFlags(cmd)}
			rec := res.Record(in, opt, provInputs)
			w := cmd.OutOrStdout()
			writeRefineSummary(w, res, rec)
			if res.Worse {
				fmt.Fprintf(w, "Refused: %s. Nothing written; fit the landmarks alone with ferry fit, or check the cells and candidates (--cell-sd, --candidate-sd).\n", res.WorseReason)
				return errQuality
			}
			file, err := res.File(base, rec)
			if err != nil {
				return err
			}
			data, err := file.Marshal()
			if err != nil {
				return err
			}
			if pairsPath != "" {
				if err := writePairsFile(cmd.Context(), pairsPath, prov, rec, cells.Dim, job.voxels); err != nil {
					return err
				}
			}
			if err := outfile.WriteBytes(cmd.Context(), out, data); err != nil {
				return err
			}
			if pairsPath != "" {
				fmt.Fprintf(w, "Wrote %s\n", pairsPath)
			}
			fmt.Fprintf(w, "Wrote %s\n", out)
			return nil
		},
	}
	flags.register(cmd)
	flags.registerKeep(cmd)
	fl := cmd.Flags()
	fl.StringVarP(&out, "output", "o", "", "refined transform file to write (JSON)")
	fl.StringVar(&cellSD, "cell-sd", "", "localisation error of the somata's own coordinates X,Y,Z in µm (one standard deviation); default: the landmarks' picking noise")
	fl.Float64Var(&candidateSD, "candidate-sd", match.DefaultCandidateSD, "spread of a candidate about its soma's centre in µm per axis")
	fl.StringVar(&somataPath, "somata", "", "more in vivo soma positions (id,x,y,z) that help the refinement but are not reported")
	fl.StringVar(&pairsPath, "pairs", "", "write the correspondences relied on here, in the landmark-pairs format (kind soma)")
	fl.StringVar(&decisionsPath, "decisions", "", "decisions file from review on the cells: accepted pairs join the landmarks (kind decided_soma), rejected pairs and cells with no counterpart never pair")
	fl.Float64Var(&minP, "min-p", refine.DefaultMinP, "posterior probability from which a pair joins the fit")
	fl.IntVar(&maxNodes, "max-nodes", refine.DefaultMaxNodes, "most nodes of the refined spline, landmarks included; past it an even subset of the pairs")
	return cmd
}

// distinctIDs refuses a somata file that repeats a cell's id: the pairs and
// the held-out predictions name somata by id.
func distinctIDs(cells, somata *landmarks.PointSet) error {
	seen := make(map[string]bool, len(cells.Points))
	for _, p := range cells.Points {
		seen[p.ID] = true
	}
	for _, p := range somata.Points {
		if seen[p.ID] {
			return &landmarks.InputError{File: somata.Path, Line: p.Line, Column: "id",
				Msg: fmt.Sprintf("id %q is also a cell's id in the cells file; give the extra somata ids of their own", p.ID)}
		}
	}
	return nil
}

func writePairsFile(ctx context.Context, path string, prov register.Provenance, rec refine.Record, dim int, vox register.Voxels) error {
	return refine.WritePairsTable(ctx, path, prov, rec, dim, vox)
}

// writeRefineSummary prints what the refinement did and gained.
func writeRefineSummary(w io.Writer, res *refine.Result, rec refine.Record) {
	a := res.Landmark
	fmt.Fprintf(w, "Landmark fit: %s (%s).\n", a.Chosen, a.Reason)
	fmt.Fprintf(w, "Rounds (somata %d, candidates %d):\n", rec.Somata, rec.Candidates)
	fmt.Fprintf(w, "  round  min p   pairs  nodes  added  dropped  switched  proposed  landmark LOO RMS µm\n")
	for i, r := range res.Rounds {
		fmt.Fprintf(w, "  %5d  %.3f  %6d  %5d  %5d  %7d  %8d  %8d  %.2f\n", i+1, r.Threshold, r.Pairs, r.Nodes, r.Added, r.Dropped, r.Switched, r.Proposed, r.LandmarkRMS)
	}
	if rec.PairsUsed == 0 {
		fmt.Fprintln(w, "No pair was clear enough to use: the transform is the landmark fit.")
		return
	}
	if res.Dim == 2 {
		fmt.Fprintf(w, "Pairs used: %d (%d as nodes of the spline), smoothing %.4g.\n", rec.PairsUsed, rec.PairNodes, rec.Smoothing)
	} else {
		fmt.Fprintf(w, "Pairs used: %d (%d as nodes of the spline), smoothing %.4g along x and y, %.4g along z.\n", rec.PairsUsed, rec.PairNodes, rec.Smoothing, rec.SmoothingZ)
	}
	fmt.Fprintf(w, "Landmark leave-one-out error: RMS %.2f µm before, %.2f µm after; median %.2f µm before, %.2f µm after.\n",
		rec.LandmarkRMSBefore, rec.LandmarkRMSAfter, rec.LandmarkMedBefore, rec.LandmarkMedAfter)
	fmt.Fprintf(w, "Pairs' own leave-one-out error: median %.2f µm, 95th percentile %.2f µm; %d of %d (%.1f %%) inside their 95 %% radius.\n",
		rec.PairLOOMedian, rec.PairLOOP95, rec.PairCalibration.Inside, rec.PairCalibration.N, 100*rec.PairCalibration.Share)
}
