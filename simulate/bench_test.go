package simulate

import "testing"

func BenchmarkGenerate(b *testing.B) {
	for _, bb := range []struct {
		name string
		p    Params
	}{
		{"default", DefaultParams()},
		{"small", SmallParams()},
	} {
		b.Run(bb.name, func(b *testing.B) {
			for i := 0; b.Loop(); i++ {
				if _, err := Generate(bb.p, uint64(i)); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

func BenchmarkEncode(b *testing.B) {
	s, err := Generate(DefaultParams(), 1)
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		if _, err := s.Encode(); err != nil {
			b.Fatal(err)
		}
	}
}
