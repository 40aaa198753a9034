package sample

import (
	"math"
	"testing"
)

func TestMedian(t *testing.T) {
	nan := math.NaN()
	for _, tc := range []struct {
		v    []float64
		want float64
	}{
		{[]float64{3}, 3},
		{[]float64{5, 1, 3}, 3},
		{[]float64{4, 1, 3, 2}, 2.5},
		{[]float64{nan, 4, 1, nan, 2}, 2},
		{[]float64{-1, -1e300, 1e300, 1}, 0},
	} {
		in := append([]float64(nil), tc.v...)
		if got := Median(tc.v); got != tc.want {
			t.Errorf("Median(%v) = %g, want %g", in, got, tc.want)
		}
		for i := range in {
			if in[i] != tc.v[i] && !(math.IsNaN(in[i]) && math.IsNaN(tc.v[i])) {
				t.Fatalf("Median changed its input: %v, was %v", tc.v, in)
			}
		}
	}
	for _, v := range [][]float64{nil, {}, {nan, nan}} {
		if got := Median(v); !math.IsNaN(got) {
			t.Errorf("Median(%v) = %g, want NaN", v, got)
		}
	}
}
