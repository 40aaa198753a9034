package review

import "testing"

// BenchmarkCell is what the page asks for one cell: its view and its four
// panels, on the demo's scenario (in vivo 3 × 3 × 5 µm, EM 2 µm voxels).
func BenchmarkCell(b *testing.B) {
	s, _ := demoSession(b)
	b.ResetTimer()
	k := 0
	for b.Loop() {
		if _, err := s.Cell(k); err != nil {
			b.Fatal(err)
		}
		for _, name := range panelNames {
			if _, err := s.Panel(k, name); err != nil {
				b.Fatal(err)
			}
		}
		k = (k + 7) % len(s.order)
	}
}
