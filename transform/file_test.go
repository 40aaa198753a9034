package transform

import (
	"bytes"
	"fmt"
	"strings"
	"testing"
)

func TestMarshalRoundTrip(t *testing.T) {
	src := []Vec{{0, 0, 0}, {100, 0, 0}, {0, 120, 0}, {0, 0, 80}, {60, 70, 40}, {20, 90, 10}, {90, 30, 70}}
	dst := make([]Vec, len(src))
	for i, p := range src {
		dst[i] = Vec{21000 - 0.9*p[0] + 0.01*p[1]*p[1], 14000 + 0.92*p[1], 3000 + 0.75*p[2] + 0.002*p[0]*p[2]}
	}
	aff, err := Fit(Affine, 3, src, dst, Options{})
	if err != nil {
		t.Fatal(err)
	}
	tps, err := Fit(TPS, 3, src, dst, Options{Smoothing: 0.5})
	if err != nil {
		t.Fatal(err)
	}
	chain, err := NewChain(aff.Transform, &Linear{Model: Translation, D: 3, A: Identity(), T: Vec{1, 2, 3}, Scale: 1})
	if err != nil {
		t.Fatal(err)
	}
	for _, tr := range []Transform{aff.Transform, tps.Transform, chain} {
		t.Run(string(tr.Kind()), func(t *testing.T) {
			data, err := Marshal(tr)
			if err != nil {
				t.Fatal(err)
			}
			g, err := Unmarshal(data)
			if err != nil {
				t.Fatal(err)
			}
			for _, p := range append(src, Vec{500, -40, 300}) {
				a, b := tr.Apply(p), g.Apply(p)
				if a.Sub(b).Norm() > 1e-9*(1+a.Norm()) {
					t.Errorf("Apply(%v): %v after a round trip, %v before", p, b, a)
				}
			}
			again, err := Marshal(g)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(data, again) {
				t.Error("encoding a decoded transform changes its bytes")
			}
		})
	}
}

func TestUnmarshalRefusals(t *testing.T) {
	l := &Linear{Model: Rigid, D: 3, A: Identity(), T: Vec{1, 2, 3}, Scale: 1}
	data, err := Marshal(l)
	if err != nil {
		t.Fatal(err)
	}
	good := string(data)
	tests := []struct {
		name, data, want string
	}{
		{"not JSON", "hello", "invalid character"},
		{"unknown model", strings.Replace(good, `"model":"rigid"`, `"model":"warp"`, 1), `unknown model "warp"`},
		{"model without parameters", `{"model":"affine"}`, "affine transform without its parameters"},
		{"parameters of another model", strings.Replace(good, `"model":"rigid"`, `"model":"affine"`, 1), `model "affine" holds parameters of model "rigid"`},
		{"unknown field", strings.Replace(good, `"model":"rigid"`, `"colour":"red","model":"rigid"`, 1), "unknown field"},
		{"chain nested too deep", strings.Repeat(`{"model":"chain","steps":[`, 10) + good + strings.Repeat(`]}`, 10), "nested more than 8 deep"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Unmarshal([]byte(tc.data))
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want one saying %q", err, tc.want)
			}
		})
	}
}

// Parameters that are not a valid transform (written by hand, say) are
// refused by the model's own check.
func TestUnmarshalInvalidParameters(t *testing.T) {
	l := &Linear{Model: Rigid, D: 3, A: Mat{{2, 0, 0}, {0, 1, 0}, {0, 0, 1}}, T: Vec{}, Scale: 1}
	data, err := Marshal(l)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := Unmarshal(data); err == nil {
		t.Error("a rigid transform that stretches was accepted")
	}
}

func ExampleMarshal() {
	data, err := Marshal(&Linear{Model: Translation, D: 2, A: Identity(), T: Vec{5, -3, 0}, Scale: 1})
	if err != nil {
		panic(err)
	}
	g, err := Unmarshal(data)
	if err != nil {
		panic(err)
	}
	p := g.Apply(Vec{1, 1, 0})
	fmt.Printf("%s %.0f %.0f\n", g.Kind(), p[0], p[1])
	// Output: translation 6 -2
}

// FuzzUnmarshal: no input makes the decoder panic, and whatever it accepts
// is a transform that maps a point to finite numbers.
func FuzzUnmarshal(f *testing.F) {
	l := &Linear{Model: Rigid, D: 3, A: Identity(), T: Vec{1, 2, 3}, Scale: 1}
	good, err := Marshal(l)
	if err != nil {
		f.Fatal(err)
	}
	f.Add([]byte(good))
	f.Add([]byte(`{"model":"chain","steps":[]}`))
	f.Add([]byte(`{}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		g, err := Unmarshal(data)
		if err != nil {
			return
		}
		if p := g.Apply(Vec{1, 2, 3}); !p.IsFinite() {
			t.Fatalf("accepted a transform that maps to %v", p)
		}
	})
}
