package landmarks

import (
	"strings"
	"testing"

	"ferry/transform"
)

// Coordinates whose sum overflows to infinity while centring them are
// refused in words rather than passed to the singular value decomposition,
// which panics on them.
func TestCheckSpreadOverflow(t *testing.T) {
	points := []transform.Vec{{1.7e308, 0, 0}, {1.6e308, 1, 0}, {1.5e308, 0, 1}, {1.4e308, 1, 1}}
	for need := 1; need <= 3; need++ {
		err := CheckSpread(points, 3, need)
		if err == nil || !strings.Contains(err.Error(), "too large") {
			t.Errorf("need %d: error %v, want one saying the coordinates are too large", need, err)
		}
	}
}
