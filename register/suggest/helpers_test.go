package suggest

import (
	"bytes"
	"fmt"
	"testing"

	"ferry/landmarks"
	"ferry/register"
	"ferry/simulate"
	"ferry/transform"
)

// scenarioProblem is the scenario's landmark set without its wrong pairs,
// which the tests know from the truth.
func scenarioProblem(sc *simulate.Scenario) *register.Problem {
	p := &register.Problem{Dim: 3}
	for _, l := range sc.Landmarks {
		if l.Wrong {
			continue
		}
		p.IDs = append(p.IDs, l.ID)
		p.Kinds = append(p.Kinds, landmarks.Kind(l.Kind))
		p.Source = append(p.Source, l.SourceUM)
		p.Target = append(p.Target, l.TargetUM)
	}
	return p
}

// fitFile assesses p with s and puts the fit into a transform file, as
// `ferry fit` does.
func fitFile(t testing.TB, p *register.Problem, s register.Settings) (*register.Registration, *register.Assessment) {
	t.Helper()
	a, err := register.Assess(p, s)
	if err != nil {
		t.Fatal(err)
	}
	f := register.NewRegistration(p, a, s, register.Provenance{Command: "test"})
	// suggest conditions on the fitted model's own kriging variance.
	if f, err = register.WithoutField(f); err != nil {
		t.Fatal(err)
	}
	return f, a
}

func scenarioCells(sc *simulate.Scenario) []transform.Vec {
	xs := make([]transform.Vec, len(sc.Cells))
	for i, c := range sc.Cells {
		xs[i] = c.SourceUM
	}
	return xs
}

// uncertaintyOf is f's uncertainty model as a reader of f's file decodes
// it: a copy that a test may change, leaving f as it was.
func uncertaintyOf(f *register.Registration, dim int) (*register.UncertaintyModel, error) {
	var file bytes.Buffer
	if _, err := f.WriteTo(&file); err != nil {
		return nil, err
	}
	back, err := register.ReadRegistration(&file, "transform.json")
	if err != nil {
		return nil, err
	}
	if back.Dim() != dim || back.Uncertainty == nil {
		return nil, fmt.Errorf("a %d-D registration with model %v, want %d-D with one", back.Dim(), back.Uncertainty != nil, dim)
	}
	return back.Uncertainty, nil
}
