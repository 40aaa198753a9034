package suggest

import (
	"testing"

	"ferry/register"
	"ferry/transform"
)

// BenchmarkSuggest is the size the command is meant for: ten suggestions
// over about 5,000 candidate locations for 2,000 cells under a spline of
// 100 landmarks, cells with their own localisation error. Target: a few
// seconds on two cores.
func BenchmarkSuggest(b *testing.B) {
	p, cells := synthetic(21, 3, 100, 2000)
	f, _ := fitFile(b, p, register.Settings{Model: transform.TPS, Smoothing: register.Smoothing{Value: 5}})
	lo, hi := Bounds(3, p.Source, cells)
	cand, _, err := Grid(3, lo, hi, 5000)
	if err != nil {
		b.Fatal(err)
	}
	sd := transform.Vec{0.8, 0.8, 3}
	b.ResetTimer()
	for b.Loop() {
		res, err := Suggest(f, cells, Options{N: 10, Candidates: cand, CellSD: &sd})
		if err != nil {
			b.Fatal(err)
		}
		if len(res.Suggestions) != 10 {
			b.Fatalf("%d suggestions", len(res.Suggestions))
		}
	}
}

// BenchmarkSuggestRigid is the block search of a rigid fit: five
// suggestions over the default grid (about 500 locations) for 400 cells.
func BenchmarkSuggestRigid(b *testing.B) {
	p, cells := synthetic(22, 3, 30, 400)
	f, _ := fitFile(b, p, register.Settings{Model: transform.Rigid})
	b.ResetTimer()
	for b.Loop() {
		if _, err := Suggest(f, cells, Options{N: 5}); err != nil {
			b.Fatal(err)
		}
	}
}
