package report

import (
	"bytes"
	"errors"
	"fmt"
	"html/template"
	"io"
	"math"
	"sort"
	"strings"

	"ferry/internal/sample"
	"ferry/register"
	"ferry/register/match"
	"ferry/status"
	"ferry/transform"
)

// Input is what a report is made from.
type Input struct {
	// LandmarkFile names the landmark table checked, as the user gave it.
	LandmarkFile string
	// Check is the leave-one-out check of the landmarks: Assessment.JSON,
	// or the summary kept in a transform file.
	Check *register.CheckJSON
	// Source is the source position (µm) of every landmark of
	// Check.Landmarks, in the same order.
	Source []transform.Vec
	// Excluded are the ids left out of the check with --exclude.
	Excluded []string
	// Transform is the transform file that the uncertainty map is computed
	// from and through which the errors and the cells are carried back to
	// the source; TransformFile names it, or is empty when the transform
	// was fitted for the report.
	Transform     *transform.File
	TransformFile string
	// Cells, when not nil, are the mapped cells of CellsFile (register.ReadMappedTable).
	Cells     []register.MappedCell
	CellsFile string
	// CellsAssumed says what had to be assumed about the frame or units of
	// the cells' positions (register.MappedTable.Assumed); the page warns of it.
	CellsAssumed string
	// Matches, when not nil, are the matches of MatchesFile (match.ReadMatchesTable).
	Matches     []match.Row
	MatchesFile string
	// Provenance names the inputs with their SHA-256, the flags and the
	// program; it is printed in the footer and in a <meta> element.
	Provenance register.Provenance
}

// Page is a report ready to be written.
type Page struct {
	data pageData
	// Warnings say what the page leaves out and why (a figure that could
	// not be drawn, cells that could not be placed). The page says the
	// same to its reader.
	Warnings []string
}

// New computes the figures and tables of the report.
func New(in *Input) (*Page, error) {
	ck := in.Check
	switch {
	case ck == nil:
		return nil, errors.New("report: no check to report")
	case len(ck.Landmarks) == 0:
		return nil, errors.New("report: the check has no landmarks")
	case ck.Dim != 2 && ck.Dim != 3:
		return nil, fmt.Errorf("report: the check is %d-D: want 2 or 3", ck.Dim)
	case len(in.Source) != len(ck.Landmarks):
		return nil, fmt.Errorf("report: %d source positions for %d landmarks", len(in.Source), len(ck.Landmarks))
	}
	for i, l := range ck.Landmarks {
		if len(l.LOOUM) != ck.Dim {
			return nil, fmt.Errorf("report: landmark %s has a %d-D error in a %d-D check", l.ID, len(l.LOOUM), ck.Dim)
		}
		if !in.Source[i].IsFinite() {
			return nil, fmt.Errorf("report: landmark %s has no finite source position", l.ID)
		}
	}
	pg := &Page{}
	d := &pg.data
	d.Version = register.Version
	d.Provenance = in.Provenance.Line()
	d.Inputs = in.Provenance.Inputs
	d.Flags = strings.Join(in.Provenance.Flags, " ")
	d.LandmarkFile = in.LandmarkFile
	d.Title = "ferry report: " + in.LandmarkFile
	d.summarise(in)
	if in.CellsAssumed != "" {
		pg.Warnings = append(pg.Warnings, in.CellsAssumed)
	}

	var err error
	if d.ErrorsFigure, err = errorsFigure(ck); err != nil {
		return nil, err
	}
	var tr transform.Transform
	if in.Transform != nil {
		tr = in.Transform.Transform
	}
	if tr == nil {
		pg.warn(&d.VectorsNote, "The error arrows are not drawn: there is no transform to carry the errors back to the source.")
		pg.warn(&d.MapNote, "The uncertainty map is not drawn: there is no transform.")
	} else {
		d.drawVectors(pg, ck, in.Source, tr)
		d.drawMap(pg, in, tr)
	}
	if d.CalibrationFigure, d.coverage, err = calibrationFigure(ck); err != nil {
		return nil, err
	}
	d.calibrationText()
	if in.Matches != nil {
		d.summariseMatches(in.Matches, in.MatchesFile)
	}
	return pg, nil
}

// Figures is the number of figures on the page.
func (p *Page) Figures() int {
	n := 0
	for _, f := range []template.HTML{p.data.ErrorsFigure, p.data.VectorsFigure, p.data.MapFigure, p.data.CalibrationFigure} {
		if f != "" {
			n++
		}
	}
	return n
}

// WriteTo writes the page's HTML to w.
func (p *Page) WriteTo(w io.Writer) (int64, error) {
	var buf bytes.Buffer
	if err := pageTemplate().Execute(&buf, &p.data); err != nil {
		return 0, fmt.Errorf("report: %w", err)
	}
	return buf.WriteTo(w)
}

func (p *Page) warn(note *string, msg string) {
	*note = msg
	p.Warnings = append(p.Warnings, msg)
}

// pageData is what the template shows.
type pageData struct {
	Title, Version, Provenance, Flags string
	Inputs                            []register.Input
	LandmarkFile                      string

	N, Dim, Flagged          int
	Excluded                 string
	Model, Reason, Smoothing string
	SmoothingNote            string
	ExcludeFlagged           string
	Mirrored                 bool
	TransformFrom            string
	RMS, Median, Max         string
	CalibrationShare         string
	CalibrationText          string
	FlaggedRows              []landmarkRow
	Landmarks                []landmarkRow
	Models                   []modelRow
	Kinds                    []kindRow

	ErrorsFigure      template.HTML
	VectorsFigure     template.HTML
	VectorsCaption    string
	VectorsNote       string
	MapFigure         template.HTML
	MapCaption        string
	MapNote           string
	CalibrationFigure template.HTML
	coverage          coverage

	Cells    *cellSummary
	Matches  *matchSummary
	DimWords string
}

type landmarkRow struct {
	ID, Kind, Error, R95, Score, Flag string
	Components                        string
	Outside                           bool
}

type modelRow struct {
	Model, RMS, Median, Max, Smoothing, Note string
	Chosen, Failed                           bool
}

type kindRow struct {
	Kind, RMS, Median, Max string
	N, Flagged             int
}

type statusCount struct {
	Status string
	N      int
	Share  string
}

type cellSummary struct {
	File         string
	N            int
	Counts       []statusCount
	MedianR95    string
	MaxR95       string
	Placed       int
	NotPlaced    int
	NotPlacedWhy string
}

type matchSummary struct {
	File       string
	N          int
	Counts     []statusCount
	MedianP    string
	MedianDist string
	Ambiguous  []matchRow
}

type matchRow struct {
	ID, Candidate, PMatch, Distance, RunnerUp, PRunnerUp string
	// PNone is the probability that the cell has no counterpart, "—"
	// when the table has no p_none column.
	PNone string
	// NoCounterpart says the runner-up is that the cell has none.
	NoCounterpart bool
}

func um(x float64) string {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return "—"
	}
	return fmt.Sprintf("%.2f", x)
}

func share(k, n int) string {
	if n == 0 {
		return "—"
	}
	return fmt.Sprintf("%.0f %%", 100*float64(k)/float64(n))
}

func (d *pageData) summarise(in *Input) {
	ck := in.Check
	d.N, d.Dim = len(ck.Landmarks), ck.Dim
	d.DimWords = fmt.Sprintf("%d-D", ck.Dim)
	d.Excluded = strings.Join(in.Excluded, ", ")
	d.Model, d.Reason, d.Mirrored = ck.Model, ck.Reason, ck.Mirrored
	if ck.Model == string(transform.TPS) {
		d.Smoothing = fmt.Sprintf("%.4g", ck.Smoothing)
		// The transform is fitted to every landmark, flagged ones
		// included, and its smoothing chosen on them; the comparison was
		// made on the landmarks that passed. Say so where the two differ.
		for _, m := range ck.Models {
			if m.Model == ck.Model && m.Error == "" && math.Abs(m.Smoothing-ck.Smoothing) > 1e-9*math.Max(1, ck.Smoothing) && len(ck.Flagged) > 0 {
				d.SmoothingNote = fmt.Sprintf("S = %.4g in the transform, which is fitted to every landmark, the flagged ones included; S = %.4g fitted to the landmarks that passed, as in the comparison of models.",
					ck.Smoothing, m.Smoothing)
			}
		}
	}
	if in.TransformFile != "" {
		d.TransformFrom = in.TransformFile
	}
	d.RMS, d.Median, d.Max = um(ck.RMSUM), um(ck.MedianUM), um(ck.MaxUM)
	d.Flagged = len(ck.Flagged)
	d.ExcludeFlagged = strings.Join(append(append([]string(nil), in.Excluded...), ck.Flagged...), ",")
	c := ck.Calibration
	d.CalibrationShare = fmt.Sprintf("%d of %d landmarks (%s) have their leave-one-out error inside their predicted 95 %% radius",
		c.Inside, c.N, share(c.Inside, c.N))
	for _, st := range []string{string(status.OK), string(status.Extrapolated)} {
		if bc, found := ck.CalibrationByStatus[st]; found && bc.N > 0 {
			d.CalibrationShare += fmt.Sprintf("; %s (as map would call it, predicted from the others): %d of %d (%s)", st, bc.Inside, bc.N, share(bc.Inside, bc.N))
		}
	}
	for _, i := range byError(ck.Landmarks) {
		l := ck.Landmarks[i]
		comp := make([]string, len(l.LOOUM))
		for k, v := range l.LOOUM {
			comp[k] = fmt.Sprintf("%+.2f", v)
		}
		row := landmarkRow{
			ID: l.ID, Kind: l.Kind, Error: um(l.LOOErrorUM), R95: um(l.R95UM),
			Score: fmt.Sprintf("%.2f", l.Score), Flag: l.Flag, Components: strings.Join(comp, ", "),
			Outside: l.LOOErrorUM > l.R95UM,
		}
		d.Landmarks = append(d.Landmarks, row)
		if l.Flag != "" {
			d.FlaggedRows = append(d.FlaggedRows, row)
		}
	}
	for _, m := range ck.Models {
		r := modelRow{Model: m.Model, Chosen: m.Model == ck.Model}
		if m.Error != "" {
			r.Failed, r.Note = true, m.Error
			r.RMS, r.Median, r.Max = "—", "—", "—"
		} else {
			r.RMS, r.Median, r.Max = um(m.RMSUM), um(m.MedianUM), um(m.MaxUM)
			if m.Model == string(transform.TPS) {
				r.Smoothing = fmt.Sprintf("%.4g", m.Smoothing)
			}
			if m.Mirrored {
				r.Note = "mirrored"
			}
		}
		d.Models = append(d.Models, r)
	}
	d.Kinds = kindRows(ck.Landmarks)
}

// kindRows summarises the errors per kind of landmark, flagged ones left
// out of the numbers.
func kindRows(ls []register.LandmarkJSON) []kindRow {
	errs := map[string][]float64{}
	flagged := map[string]int{}
	for _, l := range ls {
		if _, ok := errs[l.Kind]; !ok {
			errs[l.Kind] = nil
		}
		if l.Flag != "" {
			flagged[l.Kind]++
			continue
		}
		errs[l.Kind] = append(errs[l.Kind], l.LOOErrorUM)
	}
	kinds := make([]string, 0, len(errs))
	for k := range errs {
		kinds = append(kinds, k)
	}
	sort.Strings(kinds)
	var rows []kindRow
	for _, k := range kinds {
		e := errs[k]
		r := kindRow{Kind: k, N: len(e), Flagged: flagged[k], RMS: "—", Median: "—", Max: "—"}
		if len(e) > 0 {
			ss, mx := 0.0, 0.0
			for _, x := range e {
				ss += x * x
				mx = math.Max(mx, x)
			}
			r.RMS, r.Median, r.Max = um(math.Sqrt(ss/float64(len(e)))), um(sample.Median(e)), um(mx)
		}
		rows = append(rows, r)
	}
	return rows
}

func (d *pageData) drawVectors(pg *Page, ck *register.CheckJSON, source []transform.Vec, tr transform.Transform) {
	svg, v, err := vectorsFigure(ck, source, tr)
	if err != nil {
		pg.warn(&d.VectorsNote, "The error arrows are not drawn: "+err.Error()+".")
		return
	}
	d.VectorsFigure = svg
	views := "the xy, xz and zy projections (as orthogonal views: xz below xy, zy to its right)"
	if ck.Dim == 2 {
		views = "the xy plane"
	}
	caption := fmt.Sprintf("Each landmark's leave-one-out error, carried back into the source volume through the inverse Jacobian of the transform, drawn from its source position in %s. Arrows are drawn %s times their true length", views, formatScale(v.scale))
	if v.bar > 0 {
		caption += fmt.Sprintf("; the scale bar is %s µm of error", formatLength(v.bar))
	}
	if ck.Dim == 2 {
		caption += ". y grows downwards, as in the image."
	} else {
		caption += ". y and z grow downwards, as in the image stack."
	}
	if v.shortened > 0 {
		caption += fmt.Sprintf(" %d arrow(s) would leave the field and are drawn shorter, dashed; the table of every landmark's numbers gives their length.", v.shortened)
	}
	if v.skipped > 0 {
		caption += fmt.Sprintf(" %d landmark(s) sit where the transform has no inverse Jacobian and have no arrow.", v.skipped)
	}
	d.VectorsCaption = caption
}

// formatScale writes an arrow magnification with two significant digits.
func formatScale(k float64) string {
	if k >= 10 {
		return number(math.Round(k))
	}
	return strings.TrimRight(strings.TrimRight(fmt.Sprintf("%.2g", k), "0"), ".")
}

func (d *pageData) drawMap(pg *Page, in *Input, tr transform.Transform) {
	mapper, err := register.NewMapper(in.Transform)
	if err != nil {
		pg.warn(&d.MapNote, "The uncertainty map is not drawn: "+err.Error()+".")
		if in.Cells != nil {
			d.Cells = summariseCells(in.Cells, in.CellsFile, nil)
		}
		return
	}
	res, err := uncertaintyFigure(in.Check, in.Source, mapper, tr, in.Cells)
	if err != nil {
		pg.warn(&d.MapNote, "The uncertainty map is not drawn: "+err.Error()+".")
		return
	}
	d.MapFigure = res.svg
	g := res.grid
	plane := ""
	if in.Check.Dim == 3 {
		where := "the middle of the landmarks' depths"
		if res.cellsPlaced > 0 {
			where = "the median depth of the cells"
		}
		plane = fmt.Sprintf(" in the plane z = %s µm (%s)", formatLength(g.z), where)
	}
	caption := fmt.Sprintf("r95, the radius that holds a mapped point's true target position with 95 %% probability (what ferry map gives a cell without --cell-sd), on a %d × %d grid%s. It ranges from %s to %s µm over the field",
		g.nx, g.ny, plane, um(g.lo), um(maxOf(g.r95)))
	if g.clipped {
		caption += fmt.Sprintf("; the colour scale stops at %s µm, %.2g times the largest r95 inside the landmarks' hull, and the darkest blue stands for everything above", um(g.hi), mapHeadroom)
	}
	caption += ". Outside the dashed line points are extrapolated."
	if in.Cells != nil {
		if in.Check.Dim == 3 {
			caption += " Cells of every depth are drawn at their source x, y,"
		} else {
			caption += " Cells are drawn at their source position,"
		}
		caption += " carried back from their mapped position through the inverse of the transform, by status."
		if res.cellStride > 1 {
			caption += fmt.Sprintf(" Of the %d cells every %s is drawn (%d), so that the page stays light; the table below counts them all.",
				len(in.Cells), ordinal(res.cellStride), res.cellsPlaced)
		}
		d.Cells = summariseCells(in.Cells, in.CellsFile, &res)
		if res.cellsMissing > 0 {
			pg.Warnings = append(pg.Warnings, fmt.Sprintf("%d mapped cell(s) have no position to draw", res.cellsMissing))
		}
	}
	d.MapCaption = caption
}

func maxOf(v []float64) float64 {
	m := math.Inf(-1)
	for _, x := range v {
		if !math.IsNaN(x) && !math.IsInf(x, 0) {
			m = math.Max(m, x)
		}
	}
	return m
}

func summariseCells(cells []register.MappedCell, file string, res *mapResult) *cellSummary {
	s := &cellSummary{File: file, N: len(cells)}
	counts := map[status.Status]int{}
	var r95 []float64
	for _, c := range cells {
		counts[c.Status]++
		r95 = append(r95, c.R95)
	}
	seen := map[status.Status]bool{}
	for _, st := range status.Mapping() {
		seen[st] = true
		if counts[st] > 0 {
			s.Counts = append(s.Counts, statusCount{Status: string(st), N: counts[st], Share: share(counts[st], len(cells))})
		}
	}
	var others []string
	for st := range counts {
		if !seen[st] {
			others = append(others, string(st))
		}
	}
	sort.Strings(others)
	for _, st := range others {
		s.Counts = append(s.Counts, statusCount{Status: st, N: counts[status.Status(st)], Share: share(counts[status.Status(st)], len(cells))})
	}
	s.MedianR95, s.MaxR95 = um(sample.Median(r95)), um(maxOf(r95))
	if res != nil {
		s.Placed, s.NotPlaced = res.cellsPlaced, res.cellsMissing
	}
	return s
}

func (d *pageData) summariseMatches(ms []match.Row, file string) {
	s := &matchSummary{File: file, N: len(ms)}
	counts := map[status.Status]int{}
	var p, dist []float64
	for _, m := range ms {
		counts[m.Status]++
		if m.Status == status.Matched {
			p = append(p, m.PMatch)
			dist = append(dist, m.DistanceUM)
		}
		if m.Status == status.Ambiguous {
			row := matchRow{
				ID: m.ID, Candidate: m.Candidate, PMatch: probability(m.PMatch), Distance: um(m.DistanceUM),
				RunnerUp: m.RunnerUp, PRunnerUp: probability(m.PRunnerUp), PNone: probability(m.PNone),
			}
			if m.RunnerUp == "" && !math.IsNaN(m.PNone) {
				// The other choice is that the cell has no counterpart.
				row.NoCounterpart, row.PRunnerUp = true, probability(m.PNone)
			}
			s.Ambiguous = append(s.Ambiguous, row)
		}
	}
	for _, st := range status.Matching() {
		s.Counts = append(s.Counts, statusCount{Status: string(st), N: counts[st], Share: share(counts[st], len(ms))})
	}
	s.MedianP, s.MedianDist = probability(sample.Median(p)), um(sample.Median(dist))
	d.Matches = s
}

func probability(p float64) string {
	if math.IsNaN(p) || math.IsInf(p, 0) {
		return "—"
	}
	return fmt.Sprintf("%.3f", p)
}

// calibrationText says in words how the curve lies.
func (d *pageData) calibrationText() {
	cv := d.coverage
	if cv.n == 0 {
		d.CalibrationText = "No landmark passed the check, so there is nothing to calibrate."
		return
	}
	outside := 0
	for k := range cv.expected {
		if cv.observed[k] < cv.low[k] || cv.observed[k] > cv.high[k] {
			outside++
		}
	}
	switch {
	case outside == 0:
		d.CalibrationText = fmt.Sprintf("At every level the observed share lies within the range expected of %d well-predicted landmarks: the predicted errors are consistent with the observed ones.", cv.n)
	default:
		below := 0
		for k := range cv.expected {
			if cv.observed[k] < cv.low[k] {
				below++
			}
		}
		what := "above it: the predicted radii are wider than the errors call for (conservative)"
		if below*2 >= outside {
			what = "below it: errors are larger than predicted, so r95 understates the uncertainty"
		}
		d.CalibrationText = fmt.Sprintf("At %d of %d levels the observed share leaves the range expected of %d well-predicted landmarks, mostly %s.", outside, len(cv.expected), cv.n, what)
	}
}

// ordinal writes 2 as "2nd", 3 as "3rd", 11 as "11th".
func ordinal(k int) string {
	suffix := "th"
	if k%100 < 11 || k%100 > 13 {
		switch k % 10 {
		case 1:
			suffix = "st"
		case 2:
			suffix = "nd"
		case 3:
			suffix = "rd"
		}
	}
	return fmt.Sprintf("%d%s", k, suffix)
}
