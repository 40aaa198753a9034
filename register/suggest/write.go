package suggest

import (
	"context"
	"encoding/csv"
	"io"
	"math"
	"strconv"

	"ferry/landmarks"
	"ferry/register"
	"ferry/transform"
)

// Output says how a Result is written.
type Output struct {
	Provenance register.Provenance
	// SourceVoxel and TargetVoxel, when not nil, are the voxel sizes (µm
	// per voxel) the landmarks were given in: source and target positions
	// are then written in voxels of that side. Radii stay in µm.
	SourceVoxel, TargetVoxel *transform.Vec
	// Where is the points file the candidates came from, in the same
	// order, or nil for the default grid: its ids go into the column
	// where_id and its extra columns follow.
	Where *landmarks.PointSet
}

// columns is the header of the suggestions table.
func (r *Result) columns(out Output) []string {
	axes := []string{"x", "y", "z"}[:r.Dim]
	h := []string{"rank"}
	h = append(h, axes...)
	for _, a := range axes {
		h = append(h, "target_"+a)
	}
	h = append(h, "r95_after_um", "gain_um", "mean_r95_after_um", "target_r95_um")
	for _, a := range axes {
		h = append(h, "target_sd_"+a+"_um")
	}
	h = append(h, "status")
	for _, side := range []string{register.FrameSource, register.FrameTarget} {
		for _, a := range axes {
			h = append(h, side+"_"+a+"_um")
		}
	}
	if out.Where != nil {
		h = append(h, "where_id")
		h = append(h, landmarks.KeptColumnNames(h, out.Where.ExtraColumns)...)
	}
	return h
}

// coordinates are the frames and units of the table's position columns.
func (r *Result) coordinates(out Output) []register.Coordinates {
	axes := []string{"x", "y", "z"}[:r.Dim]
	named := func(prefix, suffix string) []string {
		c := make([]string, len(axes))
		for k, a := range axes {
			c[k] = prefix + a + suffix
		}
		return c
	}
	return []register.Coordinates{
		register.CoordinatesIn(named("", ""), register.FrameSource, out.SourceVoxel),
		register.CoordinatesIn(named("target_", ""), register.FrameTarget, out.TargetVoxel),
		register.CoordinatesIn(named("source_", "_um"), register.FrameSource, nil),
		register.CoordinatesIn(named("target_", "_um"), register.FrameTarget, nil),
	}
}

// WriteTable writes the suggestions to path with their sidecar (see
// register.Sidecar), whole or not at all.
func (r *Result) WriteTable(ctx context.Context, path string, out Output) error {
	return register.WriteTable(ctx, path, out.Provenance, r.coordinates(out), func(w io.Writer) error {
		return r.WriteCSV(w, out)
	})
}

// WriteCSV writes the suggestions as a table, header row first: rank, the source position x, y, z, the predicted target position
// target_x, target_y, target_z, r95_after_um (the cells' median r95 once
// suggestions 1 to rank are added), gain_um (its drop due to this one),
// mean_r95_after_um, target_r95_um and target_sd_*_um (the uncertainty of
// the predicted target), status, both positions again in micrometres
// (source_x_um…, target_x_um…), and with a --where file its id
// (where_id) and extra columns. A 2-D result has no z columns.
func (r *Result) WriteCSV(w io.Writer, out Output) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(r.columns(out)); err != nil {
		return err
	}
	for _, s := range r.Suggestions {
		row := []string{strconv.Itoa(s.Rank)}
		src, dst := r.inUnits(s, out)
		for k := range r.Dim {
			row = append(row, formatNumber(src[k]))
		}
		for k := range r.Dim {
			row = append(row, formatNumber(dst[k]))
		}
		row = append(row, formatNumber(s.R95After), formatNumber(s.Gain), formatNumber(s.MeanR95After), formatNumber(s.TargetR95))
		for k := range r.Dim {
			row = append(row, formatNumber(s.TargetSD[k]))
		}
		row = append(row, s.Status)
		for _, v := range []transform.Vec{s.Source, s.Target} {
			for k := range r.Dim {
				row = append(row, formatNumber(v[k]))
			}
		}
		if out.Where != nil {
			p := out.Where.Points[s.Candidate]
			row = append(row, p.ID)
			row = append(row, p.Extra...)
		}
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// inUnits returns a suggestion's source and target positions in the units
// they are written in.
func (r *Result) inUnits(s Suggestion, out Output) (src, dst transform.Vec) {
	src, dst = s.Source, s.Target
	for k := range r.Dim {
		if out.SourceVoxel != nil {
			src[k] /= out.SourceVoxel[k]
		}
		if out.TargetVoxel != nil {
			dst[k] /= out.TargetVoxel[k]
		}
	}
	return src, dst
}

// formatNumber writes a coordinate or a radius to four decimals (a
// nanometre of micrometres), never as "-0.0000".
func formatNumber(x float64) string {
	s := strconv.FormatFloat(x, 'f', 4, 64)
	if s == "-0.0000" {
		return "0.0000"
	}
	return s
}

// round4 rounds to four decimals, as the table does.
func round4(x float64) float64 {
	v := math.Round(x*1e4) / 1e4
	if v == 0 {
		return 0
	}
	return v
}

// ResultJSON is the JSON form of a Result: the same numbers as the table,
// with the search around them.
type ResultJSON struct {
	Provenance  string  `json:"provenance"`
	Model       string  `json:"model"`
	Smoothing   float64 `json:"smoothing"`
	NoiseFactor float64 `json:"noise_factor"`
	Search      string  `json:"search"`
	Cells       int     `json:"cells"`
	SearchCells int     `json:"search_cells"`
	Candidates  int     `json:"candidates"`
	// GridSpacingUM is null when the candidates came from a file.
	GridSpacingUM   *float64         `json:"grid_spacing_um"`
	R95BeforeUM     float64          `json:"r95_before_um"`
	MeanR95BeforeUM float64          `json:"mean_r95_before_um"`
	Suggestions     []SuggestionJSON `json:"suggestions"`
}

// SuggestionJSON is one row of the table. The z fields are absent in 2-D,
// the where fields without a --where file.
type SuggestionJSON struct {
	Rank           int               `json:"rank"`
	X              float64           `json:"x"`
	Y              float64           `json:"y"`
	Z              *float64          `json:"z,omitempty"`
	TargetX        float64           `json:"target_x"`
	TargetY        float64           `json:"target_y"`
	TargetZ        *float64          `json:"target_z,omitempty"`
	R95AfterUM     float64           `json:"r95_after_um"`
	GainUM         float64           `json:"gain_um"`
	MeanR95AfterUM float64           `json:"mean_r95_after_um"`
	TargetR95UM    float64           `json:"target_r95_um"`
	TargetSDUM     []float64         `json:"target_sd_um"`
	Status         string            `json:"status"`
	WhereID        *string           `json:"where_id,omitempty"`
	WhereColumns   map[string]string `json:"where_columns,omitempty"`
}

// JSON is the result in the form `ferry suggest --json` prints.
func (r *Result) JSON(out Output) ResultJSON {
	j := ResultJSON{
		Provenance: out.Provenance.Line(), Model: string(r.Model), Smoothing: r.Smoothing,
		NoiseFactor: r.NoiseFactor, Search: "greedy", Cells: len(r.CellR95Before),
		SearchCells: r.SearchCells, Candidates: len(r.Candidates),
		R95BeforeUM: round4(r.R95Before), MeanR95BeforeUM: round4(r.MeanR95Before),
		Suggestions: []SuggestionJSON{},
	}
	if r.GridSpacing > 0 {
		h := round4(r.GridSpacing)
		j.GridSpacingUM = &h
	}
	for _, s := range r.Suggestions {
		src, dst := r.inUnits(s, out)
		sj := SuggestionJSON{
			Rank: s.Rank, X: round4(src[0]), Y: round4(src[1]),
			TargetX: round4(dst[0]), TargetY: round4(dst[1]),
			R95AfterUM: round4(s.R95After), GainUM: round4(s.Gain), MeanR95AfterUM: round4(s.MeanR95After),
			TargetR95UM: round4(s.TargetR95), Status: s.Status,
		}
		if r.Dim == 3 {
			z, tz := round4(src[2]), round4(dst[2])
			sj.Z, sj.TargetZ = &z, &tz
		}
		for k := range r.Dim {
			sj.TargetSDUM = append(sj.TargetSDUM, round4(s.TargetSD[k]))
		}
		if out.Where != nil {
			p := out.Where.Points[s.Candidate]
			id := p.ID
			sj.WhereID = &id
			if len(p.Extra) > 0 {
				sj.WhereColumns = map[string]string{}
				for c, name := range out.Where.ExtraColumns {
					sj.WhereColumns[name] = p.Extra[c]
				}
			}
		}
		j.Suggestions = append(j.Suggestions, sj)
	}
	return j
}
