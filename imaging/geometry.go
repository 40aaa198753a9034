package imaging

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"ferry/transform"
)

// Geometry places a stack in its space: voxel (i, j, k) is centred at
// OriginUM + (i·VoxelUM[0], j·VoxelUM[1], k·VoxelUM[2]) µm.
//
// A Geometry read from a file says what the file records and no more: a side
// of VoxelUM is 0 where the file records no voxel size along that axis, and
// HasOrigin is false along an axis whose origin the file does not record
// (OriginUM is then 0 there, the default of docs/formats.md, "Images").
type Geometry struct {
	VoxelUM   transform.Vec `json:"voxel_um"`
	OriginUM  transform.Vec `json:"origin_um"`
	HasOrigin [3]bool       `json:"-"`
	// From says where the values came from, for messages: "ImageJ
	// metadata", "TIFF resolution tags", a flag's name.
	From string `json:"-"`
}

// HasVoxel reports whether all three voxel sides are known.
func (g Geometry) HasVoxel() bool {
	return g.VoxelUM[0] > 0 && g.VoxelUM[1] > 0 && g.VoxelUM[2] > 0
}

// Position is the centre of voxel (i, j, k), µm.
func (g Geometry) Position(i, j, k float64) transform.Vec {
	return transform.Vec{
		g.OriginUM[0] + i*g.VoxelUM[0],
		g.OriginUM[1] + j*g.VoxelUM[1],
		g.OriginUM[2] + k*g.VoxelUM[2],
	}
}

// Extent is the box the stack's voxel centres span, µm.
func (g Geometry) Extent(width, height, depth int) (lo, hi transform.Vec) {
	return g.Position(0, 0, 0), g.Position(float64(width-1), float64(height-1), float64(depth-1))
}

// micrometresPer is the length of one unit in µm, for the unit names that
// ImageJ writes in its metadata (it spells µm as "micron" or with the
// escape \u00B5m; recalled from memory) and the common abbreviations.
func micrometresPer(unit string) (float64, bool) {
	switch strings.ToLower(strings.TrimSpace(unit)) {
	case "micron", "microns", "um", "µm", "μm", `\u00b5m`, "micrometer", "micrometre", "micrometers", "micrometres":
		return 1, true
	case "nm", "nanometer", "nanometre", "nanometers", "nanometres":
		return 1e-3, true
	case "mm", "millimeter", "millimetre", "millimeters", "millimetres":
		return 1e3, true
	case "cm", "centimeter", "centimetre":
		return 1e4, true
	case "m", "meter", "metre", "meters", "metres":
		return 1e6, true
	case "inch", "inches", "in":
		return 25400, true
	}
	return 0, false
}

// imageJ holds the keys of an ImageJ ImageDescription ("ImageJ=…" followed
// by key=value lines) that place the image.
type imageJ struct {
	unit       string
	spacing    float64
	hasSpacing bool
	origin     [3]float64 // pixels, ImageJ's convention
	hasOrigin  [3]bool
	images     int
}

// parseImageJ reads an ImageJ description; ok is false when the text is not
// one. ImageJ places pixel x at (x − xorigin)·pixelWidth in its unit, with
// the origin counted in pixels (recalled from ImageJ's Calibration class).
func parseImageJ(desc string) (m imageJ, ok bool) {
	if !strings.HasPrefix(desc, "ImageJ=") {
		return m, false
	}
	for _, line := range strings.Split(desc, "\n") {
		key, value, found := strings.Cut(strings.TrimSpace(line), "=")
		if !found {
			continue
		}
		num := func() (float64, bool) {
			v, err := strconv.ParseFloat(value, 64)
			return v, err == nil && !math.IsNaN(v) && !math.IsInf(v, 0)
		}
		switch key {
		case "unit":
			m.unit = value
		case "spacing":
			if v, good := num(); good && v > 0 {
				m.spacing, m.hasSpacing = v, true
			}
		case "xorigin", "yorigin", "zorigin":
			if v, good := num(); good {
				a := int(key[0] - 'x')
				m.origin[a], m.hasOrigin[a] = v, true
			}
		case "images":
			if v, err := strconv.Atoi(value); err == nil {
				m.images = v
			}
		}
	}
	return m, true
}

// Resolution units of TIFF 6.0 (tag 296).
const (
	resUnitNone = 1
	resUnitInch = 2
	resUnitCM   = 3
)

// tiffCalibration is what page 0 of a TIFF records about its geometry.
type tiffCalibration struct {
	description string
	xres, yres  float64 // pixels per resolution unit; 0 when absent
	resUnit     int     // 0 when absent (TIFF's default is inch)
}

// geometry turns the recorded tags into a Geometry, following ImageJ where
// its metadata are present: the resolution is then pixels per ImageJ unit,
// whatever ResolutionUnit says, because ImageJ writes it so. Without ImageJ
// metadata the resolution counts only in centimetres or inches; a resolution
// of 72 or 96 pixels per inch (or none at all) is a display default that
// many programs write without knowing the pixel size, and is ignored.
func (c tiffCalibration) geometry() Geometry {
	var g Geometry
	lateral := func(perUnit float64) {
		if c.xres > 0 && c.yres > 0 {
			g.VoxelUM[0], g.VoxelUM[1] = perUnit/c.xres, perUnit/c.yres
		}
	}
	if ij, ok := parseImageJ(c.description); ok {
		perUnit, known := micrometresPer(ij.unit)
		if !known {
			return g // uncalibrated: ImageJ's "pixel"
		}
		g.From = "ImageJ metadata"
		lateral(perUnit)
		if ij.hasSpacing {
			g.VoxelUM[2] = ij.spacing * perUnit
		}
		for a := range 3 {
			if g.VoxelUM[a] > 0 {
				// ImageJ omits an origin of 0, so a calibrated ImageJ
				// file records every origin, present or not.
				g.OriginUM[a] = -ij.origin[a] * g.VoxelUM[a]
				g.HasOrigin[a] = true
				if g.OriginUM[a] == 0 {
					g.OriginUM[a] = 0 // no −0 in messages
				}
			}
		}
		// A single plane placed by ImageJ's defaults is not placed at
		// all (one section saved alone keeps no z position): its z origin
		// counts only when written out. A stack's pages start at 0.
		g.HasOrigin[2] = g.HasOrigin[2] && (ij.hasOrigin[2] || ij.images > 1)
		return g
	}
	switch c.resUnit {
	case resUnitCM:
		lateral(1e4)
	case resUnitInch, 0:
		if c.resUnit == 0 || isDisplayDPI(c.xres) || isDisplayDPI(c.yres) {
			return g
		}
		lateral(25400)
	default:
		return g
	}
	if g.VoxelUM[0] > 0 {
		g.From = "TIFF resolution tags"
	}
	return g
}

func isDisplayDPI(r float64) bool { return r == 72 || r == 96 }

// imageJDescription is the ImageJ-compatible ImageDescription of a stack of
// depth pages with geometry g (voxel sizes known): the unit is the micron,
// the lateral pixel size goes in the resolution tags and the section
// spacing and origin here. The first line names the metadata layout;
// readers look for its key.
func imageJDescription(depth int, g Geometry) string {
	var b strings.Builder
	b.WriteString("ImageJ=1.11a\n")
	if depth > 1 {
		fmt.Fprintf(&b, "images=%d\nslices=%d\n", depth, depth)
	}
	b.WriteString("unit=micron\n")
	fmt.Fprintf(&b, "spacing=%s\n", strconv.FormatFloat(g.VoxelUM[2], 'g', -1, 64))
	if depth > 1 {
		b.WriteString("loop=false\n")
	}
	for a, key := range []string{"xorigin", "yorigin", "zorigin"} {
		if g.HasOrigin[a] {
			v := -g.OriginUM[a] / g.VoxelUM[a]
			if v == 0 {
				v = 0
			}
			fmt.Fprintf(&b, "%s=%s\n", key, strconv.FormatFloat(v, 'g', -1, 64))
		}
	}
	return b.String()
}

// rational is a TIFF RATIONAL close to x > 0: two 32-bit unsigned integers
// whose quotient is x, exact for pixel sizes that are whole picometres and
// otherwise the closest continued-fraction convergent that fits.
func rational(x float64) (num, den uint32) {
	if !(x > 0) || math.IsInf(x, 0) {
		return 0, 1
	}
	// Pixels per µm = 1e6 / (pixel size in pm).
	if pm := math.Round(1e6 / x); pm >= 1 && pm < 1<<32 && math.Abs(1e6/pm-x) <= 1e-12*x {
		g := gcd(1e6, uint64(pm))
		return uint32(1e6 / g), uint32(uint64(pm) / g)
	}
	// Convergents h/k of the continued fraction of x.
	h0, h1 := uint64(0), uint64(1)
	k0, k1 := uint64(1), uint64(0)
	r := x
	for range 64 {
		a := math.Floor(r)
		if a >= 1<<32 {
			break
		}
		h2, k2 := uint64(a)*h1+h0, uint64(a)*k1+k0
		if h2 >= 1<<32 || k2 >= 1<<32 {
			break
		}
		h0, h1, k0, k1 = h1, h2, k1, k2
		if f := r - a; f > 1e-15 {
			r = 1 / f
		} else {
			break
		}
	}
	if h1 == 0 || k1 == 0 {
		if x < 1 {
			return 1, 1<<32 - 1
		}
		return 1<<32 - 1, 1
	}
	return uint32(h1), uint32(k1)
}

func gcd(a, b uint64) uint64 {
	for b != 0 {
		a, b = b, a%b
	}
	return a
}
