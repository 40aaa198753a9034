package demo

import (
	"context"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"ferry/imaging"
	"ferry/landmarks"
	"ferry/register"
	"ferry/register/export"
	"ferry/register/match"
	"ferry/register/refine"
	"ferry/simulate"
	"ferry/status"
	"ferry/transform"
)

// Options steer the demo.
type Options struct {
	// Dir receives every file.
	Dir string
	// Seed of the scenario.
	Seed uint64
	// Params of the scenario; the zero value means simulate.DefaultParams.
	Params *simulate.Params
	// Progress, when not nil, receives a line as each step starts: for a
	// terminal, not for a pipe.
	Progress io.Writer
}

// Files are the paths the demo wrote.
type Files struct {
	simulate.Files
	// Fitted is the landmark fit's transform file; Transform the one used
	// after it, the refined one unless refine was refused.
	Fitted                     string
	Transform, Mapped, Matches string
	// SourceStack and EMStack are the images review looks at;
	// SourceVoxel the in vivo stack's voxel size (µm).
	SourceStack, EMStack string
	// SourceVoxel and EMVoxel are the stacks' voxel sizes (µm), CellSD
	// the cells' localisation error (µm per axis) that map and match used.
	SourceVoxel, EMVoxel, CellSD transform.Vec
	Pairs                        string
	Extra                        []string
}

// emStackVoxel is the voxel size of the demo's EM stack: coarse enough
// to draw in a few seconds, fine enough to see nuclei of several µm.
func emStackVoxel() transform.Vec { return transform.Vec{2, 2, 2} }

// Outcome is what the demo found, set against the truth.
type Outcome struct {
	Files      Files
	Assessment *register.Assessment
	// Flagged are the landmarks the check flagged; Wrong the ones the
	// simulator spoiled.
	Flagged, Wrong []string
	// Mapped cell errors against their true positions (µm).
	Cells                      int
	MedianError, P95Error      float64
	CoveredR95, CoveredR95Good int
	Good                       int
	Statuses                   map[status.Status]int
	Elapsed                    time.Duration
	// Matches summarises match; MatchedRight and MatchedWrong count the
	// matched cells against the truth, WithCounterpart the cells that have
	// one, UnmatchedRight the unmatched cells that truly have none.
	Matches                                     match.Summary
	Candidates                                  int
	MatchedRight, MatchedWrong, WithCounterpart int
	UnmatchedRight                              int
	// OverlayMarks is how many mapped cells the overlay marks;
	// OverlayOutside the share of its pixels the in vivo stack does not
	// reach.
	OverlayMarks   int
	OverlayOutside float64
	// Warped is the in vivo stack warped into the EM frame, as ferry warp
	// writes it.
	Warped string
	// Export is what the export wrote and measured.
	Export *export.Result
	// Refined is the refinement with the somata; Fit is the landmark fit's
	// mapping and matching against the truth, for comparison.
	Refined       *refine.Result
	RefineRecord  refine.Record
	RefineRefused string
	Fit           Scores
	// flaggedVerdicts are the first check's verdicts on the landmarks it
	// flagged.
	flaggedVerdicts []register.LandmarkCheck
}

// FileNames are the names of the files Run writes into its folder, the
// simulator's included.
func FileNames() []string {
	return append(simulate.FileNames(), "transform.json", "refined.json", "soma_pairs.csv", "soma_pairs.csv.json",
		"mapped.csv", "mapped.csv.json", "matches.csv", "matches.csv.json", "overlay.png", WarpedFile, WarpedFile+".json",
		"em_stack.tif", "report.html")
}

// Scores are a mapping and a matching against the truth.
type Scores struct {
	MedianError, P95Error                 float64
	Covered                               int
	MatchedRight, MatchedWrong, Ambiguous int
}

// Run simulates the scenario into o.Dir and does the job on its files.
func Run(ctx context.Context, o Options) (*Outcome, error) {
	start := time.Now()
	step := func(format string, a ...any) {
		if o.Progress != nil {
			fmt.Fprintf(o.Progress, "  … "+format+"\n", a...)
		}
	}
	params := simulate.DefaultParams()
	if o.Params != nil {
		params = *o.Params
	}
	if err := simulate.CheckFolder(o.Dir, FileNames()...); err != nil {
		return nil, err
	}
	step("simulating the scenario (seed %d)", o.Seed)
	scen, err := simulate.Generate(params, o.Seed)
	if err != nil {
		return nil, err
	}
	out := &Outcome{Statuses: map[status.Status]int{}}
	if out.Files.Files, err = scen.WriteContext(ctx, o.Dir); err != nil {
		return nil, err
	}
	f := &out.Files

	step("checking %d landmarks by leave-one-out", len(scen.Landmarks))
	set, err := landmarks.ReadPairs(f.Landmarks)
	if err != nil {
		return nil, err
	}
	vox := register.Voxels{}
	if params.TargetVoxelUM != (transform.Vec{}) {
		v := params.TargetVoxelUM
		vox.Target = &v
	}
	// The check, and the fit without the landmarks it flags, as a user
	// who looked at them and found them wrong would make it (ferry fit).
	settings := register.Settings{Smoothing: register.Smoothing{Auto: true}}
	fitted, err := register.CheckAndFit(ctx, set, nil, vox, settings, false)
	if err != nil {
		return nil, err
	}
	out.flaggedVerdicts, out.Wrong = fitted.LeftOut, scen.WrongLandmarks()
	for _, l := range fitted.LeftOut {
		out.Flagged = append(out.Flagged, l.ID)
	}
	step("fitted without the %d flagged landmarks", len(out.Flagged))
	problem, a := fitted.Problem, fitted.Assessment
	out.Assessment = a
	prov := register.Provenance{Command: "demo", Inputs: []register.Input{register.PairsInput(set)},
		Flags: []string{fmt.Sprintf("--seed=%d", o.Seed), "--exclude=" + strings.Join(out.Flagged, ",")}}
	f.Fitted = filepath.Join(o.Dir, "transform.json")
	if err := register.NewRegistration(problem, a, settings, prov).WriteFile(ctx, f.Fitted); err != nil {
		return nil, err
	}
	// Read the file back, as map would: the demo uses what it wrote.
	f.Transform = f.Fitted
	job, err := register.LoadMapping(f.Fitted, f.Cells, false)
	if err != nil {
		return nil, err
	}
	tf, cells, pos := job.Registration, job.Cells, job.Pos
	cands, candPos, err := job.Candidates(f.Candidates)
	if err != nil {
		return nil, err
	}
	cellSD := params.CellSDUM
	trueCandidate := map[string]string{}
	truth := map[string]simulate.Cell{}
	for _, c := range scen.Cells {
		trueCandidate[c.ID] = c.TrueCandidate
		truth[c.ID] = c
	}
	score := func(mapped []register.Mapped, res []match.Result) Scores {
		var sc Scores
		var errs []float64
		for i, c := range cells.Points {
			e := mapped[i].Pos.Sub(truth[c.ID].TrueTargetUM).Norm()
			errs = append(errs, e)
			if e <= mapped[i].R95 {
				sc.Covered++
			}
			switch res[i].Status {
			case status.Matched:
				if cands.Points[res[i].Candidate].ID == trueCandidate[c.ID] {
					sc.MatchedRight++
				} else {
					sc.MatchedWrong++
				}
			case status.Ambiguous:
				sc.Ambiguous++
			}
		}
		sort.Float64s(errs)
		sc.MedianError, sc.P95Error = quantile(errs, 0.5), quantile(errs, 0.95)
		return sc
	}
	matchOpt := match.Options{Dim: cells.Dim, CellIDs: ids(cells), CandidateIDs: ids(cands)}

	// The landmark fit alone, for the comparison.
	if err := job.Prepare(); err != nil {
		return nil, err
	}
	fitMapper := job.Mapper
	fitRes, err := match.Match(fitMapper, pos, &cellSD, candPos, matchOpt)
	if err != nil {
		return nil, err
	}
	out.Fit = score(fitMapper.MapAll(pos, &cellSD, false), fitRes)

	step("refining the fit with %d somata and %d EM nuclei", len(pos), len(candPos))
	rin := refine.Input{Landmarks: problem, Assessment: a, Somata: pos, SomaIDs: ids(cells), Candidates: candPos, CandidateIDs: ids(cands)}
	ropt := refine.Options{Settings: settings, CellSD: &cellSD}
	rres, err := refine.Refine(rin, ropt)
	if err != nil {
		return nil, err
	}
	out.Refined = rres
	rinputs := []register.Input{register.PairsInput(set), register.PointsInput(cells), register.PointsInput(cands)}
	out.RefineRecord = rres.Record(rin, ropt, rinputs)
	if rres.Worse {
		out.RefineRefused = rres.WorseReason
	} else {
		rf, err := rres.File(tf, out.RefineRecord)
		if err != nil {
			return nil, err
		}
		f.Transform = filepath.Join(o.Dir, "refined.json")
		if err := rf.WriteFile(ctx, f.Transform); err != nil {
			return nil, err
		}
		f.Pairs = filepath.Join(o.Dir, "soma_pairs.csv")
		pprov := register.Provenance{Command: "refine", Inputs: rinputs,
			Flags: []string{fmt.Sprintf("--cell-sd=%g,%g,%g", cellSD[0], cellSD[1], cellSD[2])}}
		if err := refine.WritePairsTable(ctx, f.Pairs, pprov, out.RefineRecord, cells.Dim, vox); err != nil {
			return nil, err
		}
		// Map and match through the refined file as read back.
		if job, err = register.LoadMapping(f.Transform, f.Cells, false); err != nil {
			return nil, err
		}
		if err := job.Prepare(); err != nil {
			return nil, err
		}
		tf = job.Registration
	}

	step("mapping %d cells", len(scen.Cells))
	mapper := job.Mapper
	mapped := mapper.MapAll(pos, &cellSD, false)
	f.Mapped = filepath.Join(o.Dir, "mapped.csv")
	mprov := job.Provenance("map", []string{fmt.Sprintf("--cell-sd=%g,%g,%g", cellSD[0], cellSD[1], cellSD[2])})
	if err := register.WriteMappedTable(ctx, f.Mapped, mprov, cells, mapped, register.FrameTarget, tf.Voxels.Target); err != nil {
		return nil, err
	}

	step("matching %d cells against %d EM nuclei", len(scen.Cells), len(scen.Candidates))
	res, err := match.Match(mapper, pos, &cellSD, candPos, matchOpt)
	if err != nil {
		return nil, err
	}
	if out.Matches, err = match.Summarise(cells, cands, res); err != nil {
		return nil, err
	}
	out.Candidates = len(cands.Points)
	f.Matches = filepath.Join(o.Dir, "matches.csv")
	xprov := job.Provenance("match", mprov.Flags, register.PointsInput(cands))
	if err := match.WriteMatchesTable(ctx, f.Matches, xprov, cells, cands, res, tf.Voxels.Target); err != nil {
		return nil, err
	}
	for i, r := range res {
		want := trueCandidate[cells.Points[i].ID]
		if want != "" {
			out.WithCounterpart++
		}
		switch r.Status {
		case status.Matched:
			if r.Candidate >= 0 && cands.Points[r.Candidate].ID == want {
				out.MatchedRight++
			} else {
				out.MatchedWrong++
			}
		case status.Unmatched:
			if want == "" {
				out.UnmatchedRight++
			}
		}
	}

	step("drawing the scenario's images and the overlay")
	ip := scen.DefaultImageParams()
	stackPath, planePath, err := scen.WriteImagesContext(ctx, o.Dir, ip)
	if err != nil {
		return nil, err
	}
	overlay, err := writeOverlay(ctx, filepath.Join(o.Dir, "overlay.png"), tf.Transform, stackPath, planePath, mapped, ids(cells))
	if err != nil {
		return nil, err
	}
	f.Extra = append(f.Extra, stackPath, planePath, overlay.path)
	out.OverlayMarks, out.OverlayOutside = overlay.marks, overlay.outside

	step("warping the in vivo stack into the EM frame")
	warped := filepath.Join(o.Dir, WarpedFile)
	if err := writeWarped(ctx, warped, tf, stackPath); err != nil {
		return nil, err
	}
	f.Extra = append(f.Extra, warped, warped+".json")
	out.Warped = warped

	// The EM block as a stack of 2 µm voxels, for ferry review.
	step("drawing the EM stack for review")
	emIP := simulate.ImageParams{TargetVoxelUM: emStackVoxel()}
	em, err := scen.EMStack(emIP)
	if err != nil {
		return nil, err
	}
	f.EMStack = filepath.Join(o.Dir, "em_stack.tif")
	if err := imaging.WriteTIFF(f.EMStack, em); err != nil {
		return nil, err
	}
	f.SourceStack, f.SourceVoxel, f.EMVoxel, f.CellSD = stackPath, ip.SourceVoxelUM, emIP.TargetVoxelUM, cellSD
	f.Extra = append(f.Extra, f.EMStack)

	step("writing the quality report")
	reportPath := filepath.Join(o.Dir, "report.html")
	if err := writeReport(ctx, reportPath, f); err != nil {
		return nil, err
	}
	f.Extra = append(f.Extra, reportPath)

	step("exporting the transform for other programs")
	exportDir := filepath.Join(o.Dir, "export")
	tv := ip.TargetVoxelUM
	// The field covers the whole in vivo stack with 10 µm to spare, as
	// docs/usage.md's walk-through asks, so that a program warping the
	// stack, or a cell, with it finds a displacement everywhere.
	fu := scen.Params.FieldUM
	box := [2]transform.Vec{{-10, -10, -10}, {fu[0] + 10, fu[1] + 10, fu[2] + 10}}
	if out.Export, err = export.Write(ctx, exportDir, tf, export.Options{
		Mapped: f.Mapped, TargetVoxel: &tv, Grid: export.GridOptions{Margin: -1, Bounds: &box}, Seed: 1,
		Provenance: register.Provenance{Command: "export", Inputs: []register.Input{
			tf.Input(), {Path: f.Mapped, SHA256: sha(f.Mapped)}},
			Flags: []string{"--mapped=" + f.Mapped, fmt.Sprintf("--target-voxel=%g,%g,%g", tv[0], tv[1], tv[2]),
				fmt.Sprintf("--bounds=%g,%g,%g,%g,%g,%g", box[0][0], box[0][1], box[0][2], box[1][0], box[1][1], box[1][2])}},
	}); err != nil {
		return nil, err
	}
	f.Extra = append(f.Extra, exportDir)

	// Against the truth.
	var errs []float64
	for i, c := range cells.Points {
		m := mapped[i]
		out.Statuses[m.Status]++
		e := m.Pos.Sub(truth[c.ID].TrueTargetUM).Norm()
		errs = append(errs, e)
		inside := e <= m.R95
		if inside {
			out.CoveredR95++
		}
		if m.Status == status.OK {
			out.Good++
			if inside {
				out.CoveredR95Good++
			}
		}
	}
	out.Cells = len(errs)
	sort.Float64s(errs)
	out.MedianError = quantile(errs, 0.5)
	out.P95Error = quantile(errs, 0.95)
	out.Elapsed = time.Since(start)
	return out, nil
}

func ids(set *landmarks.PointSet) []string {
	out := make([]string, len(set.Points))
	for i, p := range set.Points {
		out[i] = p.ID
	}
	return out
}

func sha(path string) string {
	s, err := register.FileSHA256(path)
	if err != nil {
		return ""
	}
	return s
}

func quantile(sorted []float64, p float64) float64 {
	if len(sorted) == 0 {
		return math.NaN()
	}
	return sorted[min(len(sorted)-1, int(p*float64(len(sorted))))]
}
