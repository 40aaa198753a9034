package sample

import (
	"math"
	"sort"
)

// Median is the median of the values of v that are not NaN: the middle
// value of an odd count, the mean of the two middle values of an even one;
// NaN when no value is left. v is not changed.
func Median(v []float64) float64 {
	s := make([]float64, 0, len(v))
	for _, x := range v {
		if !math.IsNaN(x) {
			s = append(s, x)
		}
	}
	if len(s) == 0 {
		return math.NaN()
	}
	sort.Float64s(s)
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return 0.5 * (s[len(s)/2-1] + s[len(s)/2])
}
