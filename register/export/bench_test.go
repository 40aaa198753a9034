package export

import (
	"context"
	"testing"

	"ferry/transform"
)

// BenchmarkSampleField samples a 30-landmark 3-D spline on a grid of
// 1 million points (100 × 100 × 100), both forms of the field.
func BenchmarkSampleField(b *testing.B) {
	s := testSpline(b, 3)
	g, err := FieldGrid(s, GridOptions{Spacing: transform.Vec{5, 4, 3}, Margin: 50})
	if err != nil {
		b.Fatal(err)
	}
	a, t, err := transform.AffinePart(s)
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		if _, err := SampleField(context.Background(), s, a, t, g, nil); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(g.Samples()), "samples")
}
