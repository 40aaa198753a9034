package imaging

import (
	"image"
	"image/color"
	"math"
	"os"
	"testing"

	"ferry/status"
)

// plane is a stack of depth 1 with values f(i, j).
func plane(t testing.TB, w, h, bits int, f func(i, j int) uint16) *Stack {
	t.Helper()
	s, err := NewStack(w, h, 1, bits)
	if err != nil {
		t.Fatal(err)
	}
	for j := range h {
		for i := range w {
			s.Set(i, j, 0, f(i, j))
		}
	}
	return s
}

func rgb(c Colour) color.RGBA {
	r, g, b := c.bytes()
	return color.RGBA{r, g, b, 255}
}

func TestOverlayColours(t *testing.T) {
	// Each plane is 0 or 1000 in quarters of a 40 × 40 image, so that the
	// percentiles are 0 (or, without zeros, 1000) and 1000.
	target := plane(t, 40, 40, 16, func(i, j int) uint16 { return uint16(1000 * (i / 20)) })
	source := plane(t, 40, 40, 16, func(i, j int) uint16 { return uint16(1000 * (j / 20)) })
	img := Overlay(target, source, nil, OverlayOptions{KeepZeros: true})
	sum := func(a, b Colour) color.RGBA {
		x, y := rgb(a), rgb(b)
		c := func(p, q uint8) uint8 { return uint8(min(int(p)+int(q), 255)) }
		return color.RGBA{c(x.R, y.R), c(x.G, y.G), c(x.B, y.B), 255}
	}
	tests := []struct {
		x, y int
		want color.RGBA
	}{
		{5, 5, rgb(Black)},
		{30, 5, rgb(SkyBlue)},
		{5, 30, rgb(Orange)},
		{30, 30, sum(SkyBlue, Orange)},
	}
	for _, tt := range tests {
		if got := img.RGBAAt(tt.x, tt.y); got != tt.want {
			t.Errorf("pixel (%d, %d) = %v, want %v", tt.x, tt.y, got, tt.want)
		}
	}
	// Other colours are taken.
	img = Overlay(target, nil, nil, OverlayOptions{TargetColour: Vermillion})
	if got := img.RGBAAt(30, 5); got != rgb(Vermillion) {
		t.Errorf("target colour %v, want vermillion", got)
	}
}

func TestOverlaySizes(t *testing.T) {
	big := plane(t, 30, 20, 8, func(i, j int) uint16 { return uint16(i + j) })
	small := plane(t, 10, 50, 8, func(i, j int) uint16 { return 200 })
	tests := []struct {
		name         string
		target, src  *Stack
		wantW, wantH int
	}{
		{"both", big, small, 30, 20},
		{"no target", nil, small, 10, 50},
		{"no source", big, nil, 30, 20},
		{"neither", nil, nil, 0, 0},
		{"damaged target", &Stack{Width: 5, Height: 5, Depth: 1, Bits: 8}, small, 10, 50},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			img := Overlay(tt.target, tt.src, []Mark{{X: 3, Y: 3}, {X: -50, Y: 1e300}, {X: math.NaN(), Y: 2}}, OverlayOptions{})
			if b := img.Bounds(); b.Dx() != tt.wantW || b.Dy() != tt.wantH {
				t.Errorf("size %v, want %d × %d", b, tt.wantW, tt.wantH)
			}
		})
	}
}

func TestPercentiles(t *testing.T) {
	ramp := make([]uint16, 1000)
	for n := range ramp {
		ramp[n] = uint16(n)
	}
	withZeros := append(make([]uint16, 1000), ramp[1:]...)
	tests := []struct {
		name      string
		data      []uint16
		low, high float64
		skip      bool
		lo, hi    float64
	}{
		{"ramp", ramp, 0.5, 99.5, false, 4, 994},
		{"ramp, whole range", ramp, 0, 100, false, 0, 999},
		{"zeros kept", withZeros, 0.5, 99.5, false, 0, 990},
		{"zeros skipped", withZeros, 0.5, 99.5, true, 5, 995},
		{"flat", []uint16{7, 7, 7}, 0.5, 99.5, false, 7, 8},
		{"all zeros skipped", []uint16{0, 0}, 0.5, 99.5, true, 0, 1},
	}
	for _, tt := range tests {
		lo, hi := percentiles(tt.data, tt.low, tt.high, tt.skip)
		if lo != tt.lo || hi != tt.hi {
			t.Errorf("%s: percentiles %g, %g; want %g, %g", tt.name, lo, hi, tt.lo, tt.hi)
		}
	}
}

func TestMarks(t *testing.T) {
	grey := plane(t, 60, 60, 8, func(i, j int) uint16 { return uint16(100 + (i*7+j*3)%50) })
	marks := []Mark{{X: 20, Y: 20, Status: "ok"}, {X: 40.4, Y: 19.6, Status: "extrapolated"}, {X: 20, Y: 40, Status: "ambiguous"}, {X: 59, Y: 0, Status: "unmatched"}}
	plain := Overlay(grey, nil, nil, OverlayOptions{})
	img := Overlay(grey, nil, marks, OverlayOptions{})
	sh := markShape(7)
	for _, m := range marks[:3] {
		c := image.Pt(int(math.Round(m.X)), int(math.Round(m.Y)))
		// The cell itself stays visible.
		for _, p := range []image.Point{{0, 0}, {1, 0}, {0, 1}, {-1, 0}, {0, -1}} {
			q := c.Add(p)
			if img.RGBAAt(q.X, q.Y) != plain.RGBAAt(q.X, q.Y) {
				t.Errorf("%s mark at %v covers (%d, %d)", m.Status, c, q.X, q.Y)
			}
		}
		sh := markShapeNamed(MarkShapeName(m.Status), 7)
		for _, p := range sh.stroke {
			q := c.Add(p)
			if got := img.RGBAAt(q.X, q.Y); got != rgb(StatusColour(m.Status)) {
				t.Fatalf("%s mark: stroke pixel %v is %v", m.Status, q, got)
			}
		}
		for _, p := range sh.outline {
			q := c.Add(p)
			if got := img.RGBAAt(q.X, q.Y); got != rgb(Black) {
				t.Fatalf("%s mark: outline pixel %v is %v", m.Status, q, got)
			}
		}
	}
	// The shape is symmetric under quarter turns and has four strokes.
	in := make(map[image.Point]bool)
	for _, p := range sh.stroke {
		in[p] = true
	}
	for _, p := range sh.stroke {
		if !in[image.Pt(-p.Y, p.X)] {
			t.Errorf("stroke pixel %v has no quarter-turned twin", p)
		}
		if p.X == 0 || p.Y == 0 {
			t.Errorf("stroke pixel %v lies on an axis: the corners must stay open", p)
		}
	}
	if len(sh.stroke)%4 != 0 || len(sh.stroke) < 8 {
		t.Errorf("%d stroke pixels", len(sh.stroke))
	}
	// Colours follow the status.
	// One colour per status, in every figure: the report's map draws
	// isolated cells orange and extrapolated ones reddish purple too.
	for status, want := range map[status.Status]Colour{"": Yellow, "ok": Yellow, "matched": Yellow, "isolated": Orange, "ambiguous": ReddishPurple,
		"extrapolated": ReddishPurple, "folded": Vermillion, "no_inverse": Vermillion, "unmatched": Vermillion, "other": BluishGreen} {
		if got := StatusColour(status); got != want {
			t.Errorf("status %q: colour %06x, want %06x", status, uint32(got), uint32(want))
		}
	}

	if path := os.Getenv("FERRY_OVERLAY_PNG"); path != "" {
		// For looking at: FERRY_OVERLAY_PNG=/tmp/o.png go test -run TestMarks
		if err := WritePNG(path, img); err != nil {
			t.Fatal(err)
		}
	}
}

// Statuses are told apart by shape as well as colour, ids are written beside
// the marks, and a scale bar is drawn when the pixel size is known.
func TestMarkShapesLabelsAndScale(t *testing.T) {
	seen := map[string]status.Status{}
	for _, status := range []status.Status{"matched", "ambiguous", "unmatched"} {
		name := MarkShapeName(status)
		if other, dup := seen[name]; dup {
			t.Errorf("statuses %s and %s share the shape %s", other, status, name)
		}
		seen[name] = status
		sh := markShapeNamed(name, 7)
		key := map[image.Point]bool{}
		for _, p := range sh.stroke {
			key[p] = true
			if p == (image.Point{}) {
				t.Errorf("%s covers the cell", name)
			}
		}
		for other := range seen {
			if other == name {
				continue
			}
			same := true
			for _, p := range markShapeNamed(other, 7).stroke {
				same = same && key[p]
			}
			if same {
				t.Errorf("%s and %s have the same strokes", name, other)
			}
		}
	}
	grey := plane(t, 200, 100, 8, func(i, j int) uint16 { return 60 })
	plain := Overlay(grey, nil, nil, OverlayOptions{})
	unlabelled := Overlay(grey, nil, []Mark{{X: 50, Y: 50, Status: "matched"}}, OverlayOptions{})
	labelled := Overlay(grey, nil, []Mark{{X: 50, Y: 50, Status: "matched", ID: "c12"}}, OverlayOptions{})
	changed := 0
	for y := 40; y < 60; y++ {
		for x := 60; x < 100; x++ {
			if labelled.RGBAAt(x, y) != unlabelled.RGBAAt(x, y) {
				changed++
			}
		}
	}
	if changed < 20 {
		t.Errorf("the id changed %d pixels right of the mark", changed)
	}
	scaled := Overlay(grey, nil, nil, OverlayOptions{PixelUM: 0.5})
	// 200 pixels of 0.5 µm are 100 µm wide: a 20 µm bar, 40 pixels long.
	y := 100 - 12 + 1
	for x := 10; x < 50; x++ {
		if got := scaled.RGBAAt(x, y); got != rgb(White) {
			t.Fatalf("scale bar pixel (%d, %d) is %v", x, y, got)
		}
	}
	if scaled.RGBAAt(51, y) != plain.RGBAAt(51, y) {
		t.Errorf("the scale bar runs past 40 pixels")
	}
	for _, tt := range []struct{ width, want float64 }{{100, 20}, {49, 5}, {1000, 200}, {7, 1}, {0.3, 0.05}, {0, 0}} {
		if got := ScaleBarUM(tt.width); math.Abs(got-tt.want) > 1e-12 {
			t.Errorf("ScaleBarUM(%g) = %g, want %g", tt.width, got, tt.want)
		}
	}
}
