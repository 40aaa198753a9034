package register

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"sort"
	"strings"
	"text/tabwriter"

	"ferry/internal/sample"
	"ferry/landmarks"
	"ferry/status"
	"ferry/transform"
)

// LandmarkJSON is one landmark of the check's JSON and of the transform
// file's leave-one-out summary.
type LandmarkJSON struct {
	ID         string    `json:"id"`
	Kind       string    `json:"kind"`
	LOOErrorUM float64   `json:"loo_error_um"`
	LOOUM      []float64 `json:"loo_um"`
	R95UM      float64   `json:"r95_um"`
	Score      float64   `json:"score"`
	Flag       string    `json:"flag"`
}

// ModelJSON is one model of the comparison.
type ModelJSON struct {
	Model     string  `json:"model"`
	Smoothing float64 `json:"smoothing"`
	RMSUM     float64 `json:"loo_rms_um"`
	MedianUM  float64 `json:"loo_median_um"`
	MaxUM     float64 `json:"loo_max_um"`
	Mirrored  bool    `json:"mirrored"`
	Error     string  `json:"error,omitempty"`
}

// CheckJSON is the check as one JSON object, also kept in the transform
// file.
type CheckJSON struct {
	Model       string          `json:"model"`
	Reason      string          `json:"reason"`
	Smoothing   float64         `json:"smoothing"`
	Mirrored    bool            `json:"mirrored"`
	Dim         int             `json:"dim"`
	RMSUM       float64         `json:"loo_rms_um"`
	MedianUM    float64         `json:"loo_median_um"`
	MaxUM       float64         `json:"loo_max_um"`
	Flagged     []string        `json:"flagged"`
	Calibration CalibrationJSON `json:"calibration"`
	// CalibrationByStatus splits the calibration by the map status each
	// landmark has when predicted from the others (ok, extrapolated).
	CalibrationByStatus map[string]CalibrationJSON `json:"calibration_by_status,omitempty"`
	Models              []ModelJSON                `json:"models"`
	Landmarks           []LandmarkJSON             `json:"landmarks"`
	Provenance          string                     `json:"provenance,omitempty"`
}

// CalibrationJSON is the calibration of the check.
type CalibrationJSON struct {
	Inside   int     `json:"inside_r95"`
	N        int     `json:"landmarks"`
	Share    float64 `json:"share"`
	Expected float64 `json:"expected"`
}

// JSON is the assessment as CheckJSON.
func (a *Assessment) JSON() CheckJSON {
	out := CheckJSON{
		Model: string(a.Chosen), Reason: a.Reason, Smoothing: a.Smoothing,
		Mirrored: a.Result.Mirrored, Dim: a.Dim, Flagged: a.Flagged(),
		Calibration: CalibrationJSON{Inside: a.Calibration.Inside, N: a.Calibration.N, Expected: 0.95},
	}
	if out.Flagged == nil {
		out.Flagged = []string{}
	}
	if a.Calibration.N > 0 {
		out.Calibration.Share = a.Calibration.Share()
	}
	for st, c := range a.CalibrationByStatus {
		if out.CalibrationByStatus == nil {
			out.CalibrationByStatus = map[string]CalibrationJSON{}
		}
		out.CalibrationByStatus[st] = CalibrationJSON{Inside: c.Inside, N: c.N, Share: round6(c.Share()), Expected: 0.95}
	}
	var errs []float64
	for _, l := range a.Landmarks {
		out.Landmarks = append(out.Landmarks, LandmarkJSON{
			ID: l.ID, Kind: string(l.Kind), LOOErrorUM: round6(l.LOOError),
			LOOUM: roundVec(l.LOO, a.Dim), R95UM: round6(l.R95), Score: round6(l.Score), Flag: l.Flag,
		})
		if l.Flag == "" {
			errs = append(errs, l.LOOError)
		}
	}
	out.RMSUM, out.MedianUM, out.MaxUM = round6(rms(errs)), round6(sample.Median(errs)), round6(maxOf(errs))
	for _, m := range a.Models {
		mj := ModelJSON{Model: string(m.Model), Smoothing: m.Smoothing, RMSUM: round6(m.RMS),
			MedianUM: round6(m.Median), MaxUM: round6(m.Max), Mirrored: m.Mirrored}
		if m.Err != nil {
			mj = ModelJSON{Model: string(m.Model), Error: m.Err.Error()}
		}
		out.Models = append(out.Models, mj)
	}
	return out
}

func rms(v []float64) float64 {
	if len(v) == 0 {
		return 0
	}
	s := 0.0
	for _, x := range v {
		s += x * x
	}
	return math.Sqrt(s / float64(len(v)))
}

// round6 keeps six decimals: a micrometre to the picometre is more than any
// reader needs, and the output does not change with the last bits of a sum.
func round6(x float64) float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0
	}
	return math.Round(x*1e6) / 1e6
}

func roundVec(v transform.Vec, dim int) []float64 {
	out := make([]float64, dim)
	for k := range dim {
		out[k] = round6(v[k])
	}
	return out
}

// WriteComparison prints the models compared and the choice, for fit.
func WriteComparison(w io.Writer, a *Assessment) {
	fmt.Fprintln(w, "Models compared by exact leave-one-out error (flagged landmarks left out):")
	tw := tabwriter.NewWriter(w, 2, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "  model\tRMS µm\tmedian µm\tmax µm\tsmoothing\t")
	for _, m := range a.Models {
		mark := " "
		if m.Model == a.Chosen {
			mark = "*"
		}
		if m.Err != nil {
			fmt.Fprintf(tw, "%s %s\t—\t—\t—\t\t  (%v)\n", mark, m.Model, m.Err)
			continue
		}
		sm := ""
		if m.Model == transform.TPS {
			sm = fmt.Sprintf("%.4g", m.Smoothing)
		}
		mir := ""
		if m.Mirrored {
			mir = "  mirrored"
		}
		fmt.Fprintf(tw, "%s %s\t%.2f\t%.2f\t%.2f\t%s\t%s\n", mark, m.Model, m.RMS, m.Median, m.Max, sm, mir)
	}
	tw.Flush()
	fmt.Fprintf(w, "Chosen: %s, %s.\n", a.Chosen, a.Reason)
	if a.Result.Mirrored {
		fmt.Fprintln(w, "The transform is mirrored: the target volume was imaged from the other face.")
	}
	if a.KindNoise != nil {
		var parts []string
		for _, k := range sortedKinds(a.KindNoise) {
			parts = append(parts, fmt.Sprintf("%s ×%.2f", k, math.Sqrt(a.KindNoise[k])))
		}
		fmt.Fprintf(w, "Kinds weighted by their own noise (relative error %s).\n", strings.Join(parts, ", "))
	}
}

func sortedKinds(m map[landmarks.Kind]float64) []landmarks.Kind {
	var ks []landmarks.Kind
	for k := range m {
		ks = append(ks, k)
	}
	sort.Slice(ks, func(i, j int) bool { return ks[i] < ks[j] })
	return ks
}

// WriteCheckTable prints the check for a person: every landmark's error,
// the flags with their reasons, a summary per kind and the calibration.
func WriteCheckTable(w io.Writer, a *Assessment) {
	fmt.Fprintf(w, "Leave-one-out check, %s model", a.Chosen)
	if a.Chosen == transform.TPS {
		fmt.Fprintf(w, " (smoothing %.4g)", a.Smoothing)
	}
	fmt.Fprintf(w, ", %d landmarks, errors in µm:\n", len(a.Landmarks))
	order := make([]int, len(a.Landmarks))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(i, j int) bool {
		return a.Landmarks[order[i]].LOOError > a.Landmarks[order[j]].LOOError
	})
	tw := tabwriter.NewWriter(w, 2, 0, 2, ' ', 0)
	axes := "dx\tdy\tdz"
	if a.Dim == 2 {
		axes = "dx\tdy"
	}
	fmt.Fprintf(tw, "  id\tkind\terror\t%s\tr95\tflag\n", axes)
	for _, i := range order {
		l := a.Landmarks[i]
		comp := fmt.Sprintf("%+.2f\t%+.2f", l.LOO[0], l.LOO[1])
		if a.Dim == 3 {
			comp += fmt.Sprintf("\t%+.2f", l.LOO[2])
		}
		mark := " "
		if l.Flag != "" {
			mark = "!"
		}
		fmt.Fprintf(tw, "%s %s\t%s\t%.2f\t%s\t%.2f\t%s\n", mark, l.ID, l.Kind, l.LOOError, comp, l.R95, l.Flag)
	}
	tw.Flush()

	fmt.Fprintln(w, "\nBy kind (flagged landmarks left out):")
	tw = tabwriter.NewWriter(w, 2, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "  kind\tn\tRMS µm\tmedian µm\tmax µm\tflagged\t")
	byKind := map[landmarks.Kind][]float64{}
	flagged := map[landmarks.Kind]int{}
	var kinds []landmarks.Kind
	for _, l := range a.Landmarks {
		if _, ok := byKind[l.Kind]; !ok {
			kinds = append(kinds, l.Kind)
			byKind[l.Kind] = nil
		}
		if l.Flag != "" {
			flagged[l.Kind]++
			continue
		}
		byKind[l.Kind] = append(byKind[l.Kind], l.LOOError)
	}
	sort.Slice(kinds, func(i, j int) bool { return kinds[i] < kinds[j] })
	for _, k := range kinds {
		e := byKind[k]
		fmt.Fprintf(tw, "  %s\t%d\t%.2f\t%.2f\t%.2f\t%d\t\n", k, len(e), rms(e), sample.Median(e), maxOf(e), flagged[k])
	}
	tw.Flush()
	c := a.Calibration
	if c.N > 0 {
		fmt.Fprintf(w, "\nCalibration: %d of %d landmarks (%.0f %%) have their leave-one-out error inside the predicted 95 %% radius",
			c.Inside, c.N, 100*c.Share())
		for _, st := range []string{string(status.OK), string(status.Extrapolated)} {
			if bc, ok := a.CalibrationByStatus[st]; ok && bc.N > 0 {
				fmt.Fprintf(w, "; %s: %d of %d (%.0f %%)", st, bc.Inside, bc.N, 100*bc.Share())
			}
		}
		fmt.Fprintln(w, ".")
	}
	if ids := a.Flagged(); len(ids) > 0 {
		fmt.Fprintf(w, "%d landmark(s) look wrong: check them in both volumes, correct or refit with --exclude %s\n",
			len(ids), strings.Join(ids, ","))
	} else if a.FlagLimit == 0 {
		fmt.Fprintf(w, "Too few landmarks (%d) for the check to tell a wrong one from the others: none could be flagged.\n", len(a.Landmarks))
	} else {
		fmt.Fprintln(w, "No landmark looks wrong.")
	}
}

// SummaryJSON is the leave-one-out summary kept in the transform file.
func (a *Assessment) SummaryJSON(prov Provenance) (json.RawMessage, error) {
	c := a.JSON()
	c.Provenance = prov.Line()
	return json.Marshal(c)
}
