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
	"ferry/register/match"
)

// maxAmbiguousListed bounds the ambiguous cells printed; the output file
// holds them all.
const maxAmbiguousListed = 20

func newMatchCommand() *cobra.Command {
	var out, cellSD, prior, decisions string
	var candidateSD, minP float64
	cmd := &cobra.Command{
		Use:   "match TRANSFORM CELLS CANDIDATES -o MATCHES.csv",
		Short: "Assign each mapped cell to at most one candidate, one to one",
		Long: `match maps each cell through the transform with its uncertainty and assigns it
to at most one of the candidates (EM nuclei, say, in target space), no
candidate to two cells, with the posterior probability of the choice. A cell is
matched where the choice is clear (p_match ≥ --min-p), ambiguous where it is
not (the runner-up is named), and unmatched where it most probably has no
counterpart among the candidates, as for cells mapped outside the candidates'
volume. distance_um is to the assigned candidate, or for an unmatched cell to
the nearest one. See docs/matching.md for the method.`,
		Args: exactArgs("TRANSFORM", "CELLS", "CANDIDATES"),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := requireOutput(out, append(args, decisions)...); err != nil {
				return err
			}
			if !(candidateSD >= landmarks.MinPerAxisUM && candidateSD <= landmarks.MaxPerAxisUM) {
				return fmt.Errorf("--candidate-sd: want a number of micrometres from %g to %g, got %v", landmarks.MinPerAxisUM, landmarks.MaxPerAxisUM, candidateSD)
			}
			if !(minP > 0.5 && minP < 1) {
				return fmt.Errorf("--min-p: want a probability between 0.5 and 1, got %v", minP)
			}
			share, err := parsePrior(prior)
			if err != nil {
				return err
			}
			job, err := loadMapping(args[0], args[1], cellSD, false)
			if err != nil {
				return err
			}
			for _, warning := range job.Mapper.Warnings() {
				fmt.Fprintf(cmd.ErrOrStderr(), "Warning from %s: %s\n", args[0], warning)
			}
			cells := job.Cells
			cands, candPos, err := job.Candidates(args[2])
			if err != nil {
				return err
			}
			var decided *match.Decisions
			var decisionsSHA string
			if decisions != "" {
				if decided, decisionsSHA, err = readDecisions(decisions, cells, cands); err != nil {
					return err
				}
			}
			res, err := match.Match(job.Mapper, job.Pos, job.cellSD, candPos, match.Options{
				Dim: cells.Dim, CandidateSD: candidateSD, PriorCounterpart: share, MinPMatch: minP,
				CellIDs: pointIDs(cells), CandidateIDs: pointIDs(cands), Decisions: decided,
				Progress: progress.Terminal(os.Stderr),
			})
			if err != nil {
				return err
			}
			summary, err := match.Summarise(cells, cands, res)
			if err != nil {
				return err
			}
			more := []register.Input{register.PointsInput(cands)}
			if decisions != "" {
				more = append(more, register.Input{Path: decisions, SHA256: decisionsSHA})
			}
			prov := job.Provenance("match", setFlags(cmd), more...)
			if err := writeTable(cmd, out, func(ctx context.Context, path string) error {
				return match.WriteMatchesTable(ctx, path, prov, cells, cands, res, job.Registration.Voxels.Target)
			}, func(w io.Writer) error {
				return match.WriteMatches(w, cells, cands, res, job.Registration.Voxels.Target)
			}); err != nil {
				return err
			}
			w := summaryWriter(cmd, out)
			how := "estimated from the cells"
			if share != 0 {
				how = "as given"
			}
			fmt.Fprintf(w, "Matched %d cells against %d candidates: %s. Share of cells with a counterpart: %.3f (%s).\n",
				summary.Cells, len(cands.Points), summary.Counts(), summary.PriorCounterpart, how)
			if n := len(summary.AmbiguousCells); n > 0 {
				fmt.Fprintln(w, "Ambiguous, to be checked by eye:")
				listed := summary
				if n > maxAmbiguousListed {
					listed.AmbiguousCells = listed.AmbiguousCells[:maxAmbiguousListed]
				}
				if err := listed.WriteAmbiguous(w); err != nil {
					return err
				}
				if n > maxAmbiguousListed {
					fmt.Fprintf(w, "  and %d more (status ambiguous in %s)\n", n-maxAmbiguousListed, outputName(out))
				}
			}
			fmt.Fprintf(w, "Wrote %s\n", outputName(out))
			return nil
		},
	}
	fl := cmd.Flags()
	fl.StringVarP(&out, "output", "o", "", "matches to write (CSV)")
	fl.StringVar(&cellSD, "cell-sd", "", "localisation error of the cells' own coordinates X,Y,Z in µm (one standard deviation)")
	newDecimalFlag(fl, &candidateSD, "candidate-sd", match.DefaultCandidateSD, "spread of a candidate about its cell's soma centre in µm per axis: its localisation error with the soma-to-nucleus offset")
	fl.StringVar(&prior, "prior-counterpart", "auto", "share of cells inside the candidates' volume that have a counterpart there, in (0, 1), or auto to estimate it")
	newDecimalFlag(fl, &minP, "min-p", match.DefaultMinPMatch, "posterior probability from which a match is called matched")
	fl.StringVar(&decisions, "decisions", "", "decisions file from review: accepted pairs fixed, rejected ones forbidden, cells with no counterpart left out")
	return cmd
}

// parsePrior reads --prior-counterpart: "auto" (zero) or a probability.
func parsePrior(s string) (float64, error) {
	if strings.EqualFold(strings.TrimSpace(s), "auto") {
		return 0, nil
	}
	p, err := landmarks.ParseDecimal(s)
	if err != nil || !(p > 0 && p < 1) {
		return 0, fmt.Errorf("--prior-counterpart: want auto or a probability between 0 and 1, got %q", s)
	}
	return p, nil
}

// readDecisions reads a decisions file against the cells and candidates,
// returning the decisions and the file's SHA-256 for provenance.
func readDecisions(path string, cells, cands *landmarks.PointSet) (*match.Decisions, string, error) {
	set, err := landmarks.ReadDecisions(path)
	if err != nil {
		return nil, "", err
	}
	d, err := match.ResolveDecisions(set, cells, cands)
	if err != nil {
		return nil, "", err
	}
	return d, set.SHA256, nil
}

func pointIDs(set *landmarks.PointSet) []string {
	ids := make([]string, len(set.Points))
	for i, p := range set.Points {
		ids[i] = p.ID
	}
	return ids
}
