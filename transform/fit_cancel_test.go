package transform

import (
	"context"
	"errors"
	"testing"
)

// TestFitStopsWhenCancelled: a spline fit with a cancelled context stops
// with the context's error; without one it fits.
func TestFitStopsWhenCancelled(t *testing.T) {
	var src, dst []Vec
	for i := range 30 {
		x := Vec{float64(i % 3 * 10), float64(i / 3 % 5 * 10), float64(i / 15 * 10)}
		x[0] += float64(i) * 0.37
		src = append(src, x)
		dst = append(dst, x.Add(Vec{1, 2, 3}))
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Fit(TPS, 3, src, dst, Options{LeaveOneOut: true, Context: ctx}); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled fit: %v, want context.Canceled", err)
	}
	if _, err := Fit(TPS, 3, src, dst, Options{LeaveOneOut: true, Context: context.Background()}); err != nil {
		t.Errorf("live fit: %v", err)
	}
}
