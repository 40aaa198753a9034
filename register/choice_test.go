package register

import (
	"errors"
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"ferry/landmarks"
	"ferry/transform"
)

// score makes a ModelScore from squared leave-one-out errors.
func scoreOf(kind transform.Kind, sq ...float64) ModelScore {
	m := ModelScore{Model: kind, sq: sq}
	m.MeanSquare, m.StdErr = meanStdErr(sq)
	m.RMS = math.Sqrt(m.MeanSquare)
	return m
}

// The one-standard-error rule (Breiman, Friedman, Olshen & Stone 1984,
// "Classification and Regression Trees", §3.4.3, as docs/methods.md cites
// it): the simplest model whose paired excess over the best is within one
// standard error of that excess is chosen.
func TestChooseModel(t *testing.T) {
	failed := ModelScore{Model: transform.Rigid, Err: errors.New("too few pairs")}
	for _, tc := range []struct {
		name   string
		models []ModelScore
		want   transform.Kind
	}{
		{"simpler within one standard error", []ModelScore{
			scoreOf(transform.Affine, 4.0, 1.0, 9.0, 2.0),
			scoreOf(transform.TPS, 1.0, 4.0, 1.0, 1.0),
		}, transform.Affine},
		{"simpler clearly worse", []ModelScore{
			scoreOf(transform.Affine, 9.0, 9.5, 10.0, 9.0),
			scoreOf(transform.TPS, 1.0, 1.2, 0.9, 1.1),
		}, transform.TPS},
		{"a model that failed is passed over", []ModelScore{
			failed,
			scoreOf(transform.Affine, 9.0, 9.5, 10.0, 9.0),
			scoreOf(transform.TPS, 1.0, 1.2, 0.9, 1.1),
		}, transform.TPS},
		{"the simplest of several within reach", []ModelScore{
			scoreOf(transform.Similarity, 1.5, 1.0, 2.2, 1.0),
			scoreOf(transform.Affine, 1.5, 1.2, 2.0, 1.0),
			scoreOf(transform.TPS, 1.4, 1.1, 2.0, 1.1),
		}, transform.Similarity},
		{"every model failed", []ModelScore{failed}, ""},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got, reason := chooseModel(tc.models)
			if got != tc.want {
				t.Errorf("chose %q (%s), want %q", got, reason, tc.want)
			}
			if got != "" && reason == "" {
				t.Error("no reason given")
			}
		})
	}
}

// The flag threshold approximates the Bonferroni-corrected quantile of a
// sum of dim squared t variables with m−1 degrees of freedom by a scaled
// χ² (Satterthwaite 1946). For many landmarks it must tend to the χ²
// quantile with dim degrees of freedom; it must lie above that quantile
// for few (the t's heavier tails), fall as m grows, and rise with n (more
// tests, a stricter Bonferroni level).
func TestStudentisedThreshold(t *testing.T) {
	for _, dim := range []int{2, 3} {
		p := 1 - familyAlpha/50
		chi := distuv.ChiSquared{K: float64(dim)}.Quantile(p)
		if got := studentisedThreshold(dim, 100000, 50); math.Abs(got-chi) > 0.01*chi {
			t.Errorf("dim %d, m 100000: %.4f, want the χ² quantile %.4f within 1 %%", dim, got, chi)
		}
		prev := math.Inf(1)
		for _, m := range []int{4, 6, 10, 20, 50, 200} {
			got := studentisedThreshold(dim, m, 50)
			if !(got > chi) || !(got < prev) {
				t.Errorf("dim %d, m %d: %.3f, want above %.3f and below %.3f", dim, m, got, chi, prev)
			}
			prev = got
		}
		if a, b := studentisedThreshold(dim, 30, 20), studentisedThreshold(dim, 30, 200); !(b > a) {
			t.Errorf("dim %d: threshold %.3f for 200 tests not above %.3f for 20", dim, b, a)
		}
	}
	// χ²(3) at 0.999: 16.266 (Abramowitz & Stegun 1964, table 26.8; the
	// value recalled from the table).
	if got := studentisedThreshold(3, 1000000, 50); math.Abs(got-16.266) > 0.02 {
		t.Errorf("dim 3, 50 tests, m 1e6: %.3f, want 16.266", got)
	}
}

// Kinds weigh by their own noise: the weight of a kind is the inverse of
// its median score over the overall median, normalised to mean 1, and only
// when every kind has enough landmarks and they differ enough.
func TestKindWeights(t *testing.T) {
	kinds := func(nv, ns int) []landmarks.Kind {
		var k []landmarks.Kind
		for range nv {
			k = append(k, landmarks.KindVessel)
		}
		for range ns {
			k = append(k, landmarks.KindSoma)
		}
		return k
	}
	repeat := func(v float64, n int) []float64 {
		s := make([]float64, n)
		for i := range s {
			s[i] = v
		}
		return s
	}
	for _, tc := range []struct {
		name    string
		kinds   []landmarks.Kind
		score   []float64
		flagged []bool
		want    map[landmarks.Kind]float64 // weight per kind; nil: no weights
	}{
		{"twice as noisy somata", kinds(6, 6), append(repeat(1, 6), repeat(2, 6)...), make([]bool, 12),
			map[landmarks.Kind]float64{landmarks.KindVessel: 4.0 / 3, landmarks.KindSoma: 2.0 / 3}},
		{"alike kinds", kinds(6, 6), append(repeat(1, 6), repeat(1.2, 6)...), make([]bool, 12), nil},
		{"one kind only", kinds(10, 0), repeat(1, 10), make([]bool, 10), nil},
		{"too few somata", kinds(8, 4), append(repeat(1, 8), repeat(3, 4)...), make([]bool, 12), nil},
		{"a flagged soma does not count", kinds(6, 5), append(repeat(1, 6), repeat(2, 4)...), append(make([]bool, 10), true), nil},
	} {
		t.Run(tc.name, func(t *testing.T) {
			score := tc.score
			if len(score) < len(tc.kinds) {
				score = append(score, 100) // the flagged landmark's score
			}
			n := len(tc.kinds)
			p := &Problem{Dim: 3, IDs: make([]string, n), Kinds: tc.kinds, Source: make([]transform.Vec, n), Target: make([]transform.Vec, n)}
			w, _ := kindWeights(p, score, tc.flagged)
			if tc.want == nil {
				if w != nil {
					t.Errorf("weights %v, want none", w)
				}
				return
			}
			if len(w) != len(tc.kinds) {
				t.Fatalf("%d weights for %d landmarks", len(w), len(tc.kinds))
			}
			for i, k := range tc.kinds {
				if math.Abs(w[i]-tc.want[k]) > 1e-12 {
					t.Errorf("landmark %d (%s): weight %v, want %v", i, k, w[i], tc.want[k])
				}
			}
		})
	}
}

// The small-sample widening of the calibrated variance level is
// dim·F₀.₉₅(dim, n)/χ²₀.₉₅(dim), the 95 % point of a prediction's
// standardised squared error with a scale estimated on n degrees of
// freedom (a multivariate Student t) over that with the scale known. The
// values are scipy.stats' (f.ppf and chi2.ppf, Debian's python3-scipy,
// run as /usr/bin/python3 when this test was written).
func TestSmallSampleFactor(t *testing.T) {
	for _, tc := range []struct {
		dim  int
		n    float64
		want float64
	}{
		{3, 10, 1.42357}, {3, 20, 1.18944}, {3, 28, 1.13120}, {3, 60, 1.05880}, {3, 308, 1.01114},
		{2, 10, 1.36956}, {2, 60, 1.05163},
	} {
		if got := smallSampleFactor(tc.dim, tc.n); math.Abs(got-tc.want) > 1e-4 {
			t.Errorf("dim %d, n %g: %.5f, want %.5f", tc.dim, tc.n, got, tc.want)
		}
	}
}
