package register

import (
	"fmt"
	"math"
	"sort"
	"strings"
	"testing"

	"ferry/register/internal/families"
	"ferry/transform"
)

// familyOutcome is what one scenario of register/internal/families gives.
type familyOutcome struct {
	name                  string
	wrong, found, falseFl int
	// inside and total per map status of the held-out cells.
	inside, total map[string]int
	p90, p95      float64
	// p95Hand is the cells' 95th-percentile error with the true mistakes
	// removed by hand.
	p95Hand float64
}

func (o familyOutcome) coverage(status string) float64 {
	if o.total[status] == 0 {
		return math.NaN()
	}
	return float64(o.inside[status]) / float64(o.total[status])
}

func familyProblem(s *families.Scenario, keep func(i int) bool) *Problem {
	p := &Problem{Dim: 3}
	for i := range s.IDs {
		if keep != nil && !keep(i) {
			continue
		}
		p.IDs = append(p.IDs, s.IDs[i])
		p.Kinds = append(p.Kinds, s.Kind[i])
		p.Source = append(p.Source, s.Source[i])
		p.Target = append(p.Target, s.Target[i])
	}
	return p
}

// mapCells maps the scenario's cells through the fit of p and returns the
// errors and the coverage counts per status.
func mapCells(t testing.TB, s *families.Scenario, p *Problem, set Settings) (errs []float64, inside, total map[string]int) {
	m, _ := mapperFor(t, p, set)
	xs := make([]transform.Vec, len(s.Cells))
	for i, c := range s.Cells {
		xs[i] = c.Source
	}
	inside, total = map[string]int{}, map[string]int{}
	for i, got := range m.MapAll(xs, nil, false) {
		e := got.Pos.Sub(s.Cells[i].Truth).Norm()
		errs = append(errs, e)
		total[got.Status]++
		if e <= got.R95 {
			inside[got.Status]++
		}
	}
	return errs, inside, total
}

func evaluateFamily(t testing.TB, s *families.Scenario) familyOutcome {
	set := Settings{Smoothing: Smoothing{Auto: true}}
	o := familyOutcome{name: fmt.Sprintf("%s/%d", s.Spec.Name, s.Seed)}
	a, err := Assess(familyProblem(s, nil), set)
	if err != nil {
		t.Fatal(err)
	}
	for i, l := range a.Landmarks {
		switch {
		case s.Wrong[i]:
			o.wrong++
			if l.Flag != "" {
				o.found++
			}
		case l.Flag != "":
			o.falseFl++
		}
	}
	// The cells as the user would map them: the fit that fit writes.
	errs, in, tot := mapCells(t, s, fitProblem(s, a), set)
	o.inside, o.total = in, tot
	o.p90, o.p95 = quantile(errs, 0.90), quantile(errs, 0.95)
	hand, _, _ := mapCells(t, s, familyProblem(s, func(i int) bool { return !s.Wrong[i] }), set)
	o.p95Hand = quantile(hand, 0.95)
	return o
}

func quantile(v []float64, q float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	return s[min(len(s)-1, int(q*float64(len(s))))]
}

func (o familyOutcome) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%-26s found %d/%d false %d  p95 %.2f (hand %.2f)", o.name, o.found, o.wrong, o.falseFl, o.p95, o.p95Hand)
	for _, st := range []string{StatusOK, StatusIsolated, StatusExtrapolated} {
		if o.total[st] > 0 {
			fmt.Fprintf(&b, "  %s %.3f (%d)", st, o.coverage(st), o.total[st])
		}
	}
	return b.String()
}

// TestFamiliesReport prints the outcome on every family scenario; run with
// -v -run FamiliesReport to see the figures docs/error-model.md records.
func TestFamiliesReport(t *testing.T) {
	if testing.Short() {
		t.Skip("Monte Carlo over the families")
	}
	seeds := []uint64{1, 2}
	for _, group := range []struct {
		name  string
		specs []families.Spec
	}{{"clean", families.Clean()}, {"mistakes", families.Mistakes()}} {
		falseFl, found, wrong := 0, 0, 0
		worst := 1.0
		worstHi := 0.0
		for _, seed := range seeds {
			for _, spec := range group.specs {
				o := evaluateFamily(t, families.Draw(spec, seed))
				t.Log(o)
				falseFl += o.falseFl
				found += o.found
				wrong += o.wrong
				for _, st := range []string{StatusOK, StatusExtrapolated} {
					if c := o.coverage(st); !math.IsNaN(c) {
						worst = math.Min(worst, c)
						worstHi = math.Max(worstHi, c)
					}
				}
			}
		}
		t.Logf("%s over seeds %v: %d false flags, %d of %d mistakes found, coverage %.3f to %.3f", group.name, seeds, falseFl, found, wrong, worst, worstHi)
	}
}

// fitProblem is the landmark set `ferry fit` fits by default: the flagged
// landmarks left out (CheckAndFit).
func fitProblem(s *families.Scenario, a *Assessment) *Problem {
	return familyProblem(s, func(i int) bool { return a.Landmarks[i].Flag == "" })
}
