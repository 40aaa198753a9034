package transform

import (
	"math"
	"strings"
	"testing"
)

// A chain of a spline and a rigid motion maps as the steps in turn, its
// Jacobian (the chain rule, each step's Jacobian where that step sees the
// point) matches central differences of Apply, and Invert undoes it.
func TestChainApplyJacobianInvert(t *testing.T) {
	src, dst := benchLandmarks(40)
	sp, err := Fit(TPS, 3, src, dst, Options{Smoothing: 0.5})
	if err != nil {
		t.Fatal(err)
	}
	c, s := math.Cos(0.3), math.Sin(0.3)
	rot := &Linear{Model: Rigid, D: 3, A: Mat{{c, -s, 0}, {s, c, 0}, {0, 0, 1}}, T: Vec{-20, 40, 7}, Scale: 1}
	chain, err := NewChain(sp.Transform, rot)
	if err != nil {
		t.Fatal(err)
	}
	if chain.Kind() != ChainKind || chain.Dim() != 3 {
		t.Fatalf("kind %q, dim %d", chain.Kind(), chain.Dim())
	}
	for _, p := range src[:8] {
		p = p.Add(Vec{3, -2, 1}) // off the nodes, where the spline is smooth
		want := rot.Apply(sp.Transform.Apply(p))
		if got := chain.Apply(p); got.Sub(want).Norm() > 1e-9*want.Norm() {
			t.Errorf("Apply(%v) = %v, want the steps in turn %v", p, got, want)
		}
		// Central differences with a step of 1e-3 µm on coordinates of
		// 1e5 µm: the truncation error is ~h² times the third derivative,
		// the rounding error ~1e-16·1e5/1e-3 = 1e-8; 1e-5 bounds both.
		const h = 1e-3
		jac := chain.Jacobian(p)
		for k := range 3 {
			var e Vec
			e[k] = h
			d := chain.Apply(p.Add(e)).Sub(chain.Apply(p.Sub(e))).Scale(1 / (2 * h))
			for i := range 3 {
				if math.Abs(jac[i][k]-d[i]) > 1e-5 {
					t.Errorf("at %v: ∂%d/∂%d = %.9f, central difference %.9f", p, i, k, jac[i][k], d[i])
				}
			}
		}
		back, err := chain.Invert(want)
		if err != nil {
			t.Fatal(err)
		}
		if back.Sub(p).Norm() > 1e-6 {
			t.Errorf("Invert(Apply(%v)) = %v", p, back)
		}
	}
}

// NewChain refuses an empty chain, a missing step and steps of different
// dimensions, naming the step.
func TestNewChainRefuses(t *testing.T) {
	flat := &Linear{Model: Translation, D: 2, A: Identity(), T: Vec{1, 2, 0}, Scale: 1}
	solid := &Linear{Model: Translation, D: 3, A: Identity(), T: Vec{1, 2, 3}, Scale: 1}
	for _, tc := range []struct {
		name  string
		steps []Transform
		want  string
	}{
		{"no steps", nil, "at least one transform"},
		{"a missing step", []Transform{solid, nil}, "chain step 2 is missing"},
		{"2-D after 3-D", []Transform{solid, flat}, "chain step 2 is 2-D but step 1 is 3-D"},
	} {
		if _, err := NewChain(tc.steps...); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: %v, want %q", tc.name, err, tc.want)
		}
	}
}
