package transform

import (
	"math"
	"strings"
	"testing"
)

// An encoded transform never holds a number that is not finite: Marshal
// refuses such parameters with a message naming the one at fault.
func TestMarshalRefusesNonFinite(t *testing.T) {
	src := []Vec{{0, 0, 0}, {100, 0, 0}, {0, 120, 0}, {0, 0, 80}, {60, 70, 40}, {20, 90, 10}, {90, 30, 70}}
	dst := make([]Vec, len(src))
	for i, p := range src {
		dst[i] = Vec{1.1*p[0] + 3, p[1] - 0.02*p[0]*p[0]/100, 0.9*p[2] + 1}
	}
	res, err := Fit(TPS, 3, src, dst, Options{})
	if err != nil {
		t.Fatal(err)
	}
	spline := res.Transform.(*Spline)
	nan, inf := math.NaN(), math.Inf(1)
	tests := []struct {
		name  string
		spoil func() Transform
		want  string
	}{
		{"linear offset NaN", func() Transform {
			return &Linear{Model: Translation, D: 3, A: Identity(), T: Vec{1, nan, 0}, Scale: 1}
		}, "not a finite number"},
		{"linear matrix Inf", func() Transform {
			a := Identity()
			a[2][2] = inf
			return &Linear{Model: Affine, D: 3, A: a, Scale: 1}
		}, "not a finite number"},
		{"spline weight Inf", func() Transform {
			s := spline.clone()
			s.Weights = append([]Vec(nil), spline.Weights...)
			s.Weights[4][1] = inf
			return s
		}, "kernel weight of node 5"},
		{"spline node NaN", func() Transform {
			s := spline.clone()
			s.Nodes = append([]Vec(nil), spline.Nodes...)
			s.Nodes[2][0] = nan
			return s
		}, "node 3"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Marshal(tc.spoil())
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("Marshal: error %v, want one saying %q", err, tc.want)
			}
		})
	}
	if _, err := Marshal(spline); err != nil {
		t.Errorf("the unspoilt spline: %v", err)
	}
}
