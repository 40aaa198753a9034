package report

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"html/template"
	"io"
	"math"
	"strings"

	"ferry/outfile"
	"ferry/register"
	"ferry/register/match"
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
	Transform     *register.Registration
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

// WriteFile writes the page at path whole or not at all (package outfile).
func (p *Page) WriteFile(ctx context.Context, path string) error {
	return outfile.Write(ctx, path, func(w io.Writer) error {
		_, err := p.WriteTo(w)
		return err
	})
}
