package register

import (
	"fmt"
	"math"

	"ferry/transform"
)

// MaxLinearFactor bounds every entry of a transform's linear part (target µm
// per source µm): a millionfold stretch between two images of the same
// tissue is no registration. With MaxCoordinateUM it keeps every mapped
// position, and the squares of distances between them, finite.
const MaxLinearFactor = 1e6

// plausible refuses a transform whose parameters no fit of ferry's could
// have made: an offset, a centre or a node beyond MaxCoordinateUM, or a
// linear part beyond MaxLinearFactor. A transform file's checksum only
// proves that the file is as written; one edited and resealed by hand with
// an offset of 1e200 µm otherwise mapped cells to positions whose distances
// overflowed to +Inf in the output. It refuses a chain of transforms too
// (chainUncertainty), as NewMapper's first check.
func plausible(t transform.Transform) error {
	switch t := t.(type) {
	case *transform.Linear:
		return plausibleParts(t.A, []transform.Vec{t.T}, "offset")
	case *transform.Spline:
		if err := plausibleParts(t.Matrix, []transform.Vec{t.Offset, t.Centre}, "offset or centre"); err != nil {
			return err
		}
		return plausibleParts(transform.Mat{}, t.Nodes, "node")
	case *transform.Chain:
		// Refused whatever its parameters: NewMapper calls plausible
		// first, and no uncertainty model can be given for a chain.
		return chainUncertainty(t)
	}
	return nil
}

func plausibleParts(a transform.Mat, points []transform.Vec, what string) error {
	for i := range 3 {
		for j := range 3 {
			if !(math.Abs(a[i][j]) <= MaxLinearFactor) {
				return fmt.Errorf("the transform's linear part has an entry %g, beyond ±%g: not a registration of one tissue (was the file edited?)", a[i][j], MaxLinearFactor)
			}
		}
	}
	for _, p := range points {
		for k := range 3 {
			if !(math.Abs(p[k]) <= MaxCoordinateUM) {
				return fmt.Errorf("the transform's %s lies at %g µm, beyond ±%g µm (a kilometre): not a registration of one tissue (was the file edited?)", what, p[k], MaxCoordinateUM)
			}
		}
	}
	return nil
}
