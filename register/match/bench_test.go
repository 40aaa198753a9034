package match

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"ferry/landmarks"
	"ferry/register"
	"ferry/transform"
)

// benchMapper fits an affine transform to a 4×4×4 grid of landmark pairs
// spanning a cube of side µm, targets shifted by (1000, 2000, 300) µm and
// jittered by up to a micrometre.
func benchMapper(b *testing.B, side float64) *register.Mapper {
	b.Helper()
	rng := rand.New(rand.NewPCG(11, 12))
	var s strings.Builder
	s.WriteString("id,kind,source_x,source_y,source_z,target_x,target_y,target_z\n")
	n := 0
	for i := range 4 {
		for j := range 4 {
			for k := range 4 {
				p := transform.Vec{float64(i), float64(j), float64(k)}.Scale(side / 3)
				fmt.Fprintf(&s, "v%02d,vessel,%g,%g,%g,%g,%g,%g\n", n, p[0], p[1], p[2],
					p[0]+1000+rng.Float64()-0.5, p[1]+2000+rng.Float64()-0.5, p[2]+300+rng.Float64()-0.5)
				n++
			}
		}
	}
	set, err := landmarks.ParsePairs("landmarks.csv", strings.NewReader(s.String()))
	if err != nil {
		b.Fatal(err)
	}
	prob, err := register.PrepareLandmarks(set, nil, register.Voxels{})
	if err != nil {
		b.Fatal(err)
	}
	settings := register.Settings{Model: transform.Affine}
	a, err := register.Assess(prob, settings)
	if err != nil {
		b.Fatal(err)
	}
	f := register.NewRegistration(prob, a, settings, register.Provenance{Command: "fit"})
	m, err := register.NewMapper(f)
	if err != nil {
		b.Fatal(err)
	}
	return m
}

// BenchmarkMatch matches cells against uniformly scattered candidates at
// the density of nuclei in cortex, about 1.2·10⁵ per mm³ (recalled from
// memory, as in package simulate), so that the volume grows with their
// number.
func BenchmarkMatch(b *testing.B) {
	for _, size := range []struct{ cells, cands int }{{5000, 50000}, {20000, 200000}} {
		b.Run(fmt.Sprintf("%dk_cells_%dk_candidates", size.cells/1000, size.cands/1000), func(b *testing.B) {
			const density = 1.2e-4 // per µm³
			side := math.Cbrt(float64(size.cands) / density)
			m := benchMapper(b, side)
			rng := rand.New(rand.NewPCG(13, 14))
			cands := make([]transform.Vec, size.cands)
			for j := range cands {
				cands[j] = transform.Vec{1000 + side*rng.Float64(), 2000 + side*rng.Float64(), 300 + side*rng.Float64()}
			}
			cells := make([]transform.Vec, size.cells)
			for i := range cells {
				cells[i] = transform.Vec{side * rng.Float64(), side * rng.Float64(), side * rng.Float64()}
			}
			sd := transform.Vec{0.8, 0.8, 3}
			b.ResetTimer()
			for b.Loop() {
				if _, err := Match(m, cells, &sd, cands, Options{}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
