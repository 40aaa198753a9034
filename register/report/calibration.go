package report

import (
	"html/template"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"ferry/register"
)

// coverage is the calibration curve of the check: at each expected share p,
// the share of the landmarks that passed whose standardised leave-one-out
// score (χ² with Dim degrees of freedom for a landmark the model predicts
// well) is at most the χ² quantile at p, with the range in which that share
// falls for 95 % of well-calibrated sets of as many landmarks.
type coverage struct {
	n                  int
	expected, observed []float64
	low, high          []float64
}

// coverageLevels are the expected shares of the curve: 0.05 to 0.95 in
// steps of 0.05, then 0.99.
func coverageLevels() []float64 {
	var p []float64
	for k := 1; k <= 19; k++ {
		p = append(p, float64(k)/20)
	}
	return append(p, 0.99)
}

func newCoverage(ck *register.CheckJSON) coverage {
	var scores []float64
	for _, l := range ck.Landmarks {
		if l.Flag == "" {
			scores = append(scores, l.Score)
		}
	}
	cv := coverage{n: len(scores)}
	chi := distuv.ChiSquared{K: float64(ck.Dim)}
	for _, p := range coverageLevels() {
		q := chi.Quantile(p)
		inside := 0
		for _, s := range scores {
			if s <= q {
				inside++
			}
		}
		cv.expected = append(cv.expected, p)
		if cv.n == 0 {
			continue
		}
		cv.observed = append(cv.observed, float64(inside)/float64(cv.n))
		lo, hi := binomialRange(cv.n, p, 0.025), binomialRange(cv.n, p, 0.975)
		cv.low = append(cv.low, float64(lo)/float64(cv.n))
		cv.high = append(cv.high, float64(hi)/float64(cv.n))
	}
	return cv
}

// binomialRange is the smallest k with P(K ≤ k) ≥ q for K ~ Binomial(n, p).
func binomialRange(n int, p, q float64) int {
	b := distuv.Binomial{N: float64(n), P: p}
	for k := 0; k < n; k++ {
		if b.CDF(float64(k)) >= q-1e-12 {
			return k
		}
	}
	return n
}

// calibrationFigure plots observed against expected coverage with the
// diagonal of a perfectly calibrated check and its binomial range.
func calibrationFigure(ck *register.CheckJSON) (template.HTML, coverage, error) {
	cv := newCoverage(ck)
	p := newPlot("expected share p", "observed share of landmarks")
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, 0, 1
	p.Add(lightGrid())
	legend := newLegend()
	if cv.n > 0 {
		band := make(plotter.XYs, 0, 2*len(cv.expected))
		for k, e := range cv.expected {
			band = append(band, plotter.XY{X: e, Y: cv.low[k]})
		}
		for k := len(cv.expected) - 1; k >= 0; k-- {
			band = append(band, plotter.XY{X: cv.expected[k], Y: cv.high[k]})
		}
		poly, err := plotter.NewPolygon(band)
		if err != nil {
			return "", cv, err
		}
		poly.Color = colourRadius.NRGBA(90)
		poly.LineStyle.Width = 0
		p.Add(poly)
		legend.Add("95 % range for "+number(float64(cv.n))+" landmarks", boxThumb(colourRadius.NRGBA(90)))
	}
	diag, err := plotter.NewLine(plotter.XYs{{X: 0, Y: 0}, {X: 1, Y: 1}})
	if err != nil {
		return "", cv, err
	}
	diag.LineStyle = draw.LineStyle{Color: colourReference, Width: 1.2, Dashes: []vg.Length{5, 3}}
	p.Add(diag)
	legend.Add("ideal: observed = expected", lineThumb(diag.LineStyle))
	if cv.n > 0 {
		xys := make(plotter.XYs, len(cv.expected))
		for k := range cv.expected {
			xys[k] = plotter.XY{X: cv.expected[k], Y: cv.observed[k]}
		}
		line, points, err := plotter.NewLinePoints(xys)
		if err != nil {
			return "", cv, err
		}
		line.LineStyle = draw.LineStyle{Color: colourLandmark, Width: 2}
		points.GlyphStyle = glyph(circleShape, colourLandmark, white, 3.4)
		p.Add(line, points)
		legend.Add("observed", lineThumb(line.LineStyle), glyphThumb(points.GlyphStyle))
	}
	p.X.Tick.Marker = shareTicks{}
	p.Y.Tick.Marker = shareTicks{}
	lw, lh := legendExtent(&legend)
	const side = 300
	in := measure(p, side, side)
	pw, ph := side+in.left+in.right, side+in.bottom+in.top
	w := pw + stripGap + lw
	h := vg.Length(math.Max(float64(ph), float64(lh)))
	svg, err := figureSVG(w, h, "Calibration: observed against expected coverage of the leave-one-out errors", func(c draw.Canvas) error {
		fillWhite(c)
		p.Draw(sub(c, rect(0, h-ph, pw, h)))
		legend.Draw(sub(c, rect(pw+stripGap, 0, w, h-in.top)))
		return nil
	})
	return svg, cv, err
}
