package register

import (
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
)

// appendCoord's fast path writes every value as strconv.AppendFloat with
// four decimals does: random values over many magnitudes, values on and
// next to the ties of the fourth decimal, and the edges.
func TestAppendCoordMatchesStrconv(t *testing.T) {
	want := func(x float64) string {
		s := strconv.FormatFloat(x, 'f', 4, 64)
		if s == "-0.0000" {
			s = "0.0000"
		}
		return s
	}
	check := func(x float64) {
		t.Helper()
		got, err := appendCoord(nil, x)
		if err != nil {
			t.Fatalf("%v: %v", x, err)
		}
		if string(got) != want(x) {
			t.Fatalf("%v (%b): wrote %s, strconv writes %s", x, x, got, want(x))
		}
	}
	edges := []float64{0, math.Copysign(0, -1), 1e-300, -1e-300, 0.00005, -0.00005, 0.00015, 0.00025,
		1.03125, -1.03125, 0.5, 123.45675, 99999.99995, 1e13, 1e14 - 0.5, 1e14, 1e15, 1e18, -1e18, 1e19, 1e300,
		math.MaxFloat64, -math.MaxFloat64, math.SmallestNonzeroFloat64, 4.99995, -4.99995}
	for _, x := range edges {
		check(x)
	}
	rng := rand.New(rand.NewPCG(3, 4))
	for range 300_000 {
		scale := math.Pow(10, float64(rng.IntN(22)-6))
		x := (rng.Float64()*2 - 1) * scale
		check(x)
		// The ties of the fourth decimal and their neighbours.
		tie := (math.Round(x*1e4) + 0.5) / 1e4
		check(tie)
		check(math.Nextafter(tie, math.Inf(1)))
		check(math.Nextafter(tie, math.Inf(-1)))
		// Exact binary ties: k/2⁵ has a tie at the fifth decimal.
		k := float64(rng.IntN(1 << 20))
		check(k / 32)
		check(-k / 32)
	}
}

func BenchmarkAppendCoord(b *testing.B) {
	rng := rand.New(rand.NewPCG(3, 4))
	xs := make([]float64, 4096)
	for i := range xs {
		xs[i] = rng.Float64() * 500
	}
	var buf []byte
	b.Run("appendCoord", func(b *testing.B) {
		for b.Loop() {
			for _, x := range xs {
				buf, _ = appendCoord(buf[:0], x)
			}
		}
	})
	b.Run("strconv", func(b *testing.B) {
		for b.Loop() {
			for _, x := range xs {
				buf = strconv.AppendFloat(buf[:0], x, 'f', 4, 64)
			}
		}
	})
}
