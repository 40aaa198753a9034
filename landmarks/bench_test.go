package landmarks

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"testing"
)

// cellsTable writes a cells table of n rows with two extra columns, as an
// imaging session might export it.
func cellsTable(n int) []byte {
	rng := rand.New(rand.NewPCG(3, 4))
	var b bytes.Buffer
	b.WriteString("# synthetic cells\nid,x,y,z,dff_peak,snr\n")
	for i := range n {
		fmt.Fprintf(&b, "cell%07d,%.3f,%.3f,%.3f,%.2f,%.1f\n", i,
			800*rng.Float64(), 800*rng.Float64(), 500*rng.Float64(), 3*rng.Float64(), 20*rng.Float64())
	}
	return b.Bytes()
}

func BenchmarkParsePoints(b *testing.B) {
	const rows = 1_000_000
	data := cellsTable(rows)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		set, err := ParsePoints("cells.csv", "cells", bytes.NewReader(data))
		if err != nil {
			b.Fatal(err)
		}
		if len(set.Points) != rows {
			b.Fatalf("%d points, want %d", len(set.Points), rows)
		}
	}
}
