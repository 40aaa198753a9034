package register

import (
	"errors"
	"math"
	"strings"
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

// The rule's edges, each expected value worked by hand from meanStdErr
// (the mean of the paired differences d_i of squared errors, simpler minus
// best, and its standard error sd/√n with sd on n − 1).
func TestChooseModelEdges(t *testing.T) {
	for _, tc := range []struct {
		name   string
		models []ModelScore
		want   transform.Kind
		reason string // a part of the reason given
	}{
		// d = (0, 0, 3): mean 1; squares of deviations 1 + 1 + 4 = 6,
		// 6/2/3 = 1, se 1. The excess equals one standard error, and
		// the rule (mean ≤ se) takes the simpler model.
		{"excess of exactly one standard error", []ModelScore{
			scoreOf(transform.Affine, 1, 1, 4),
			scoreOf(transform.TPS, 1, 1, 1),
		}, transform.Affine, "within one standard error of the best, tps"},
		// d = (0.5, 0.5, 3): mean 4/3; deviations −5/6, −5/6, 5/3,
		// squares 25/36·2 + 100/36 = 150/36, /2/3 → se = 5/6 < 4/3.
		// The simpler model's RMS is √(7/3) = 1.53 µm.
		{"excess of more than one standard error", []ModelScore{
			scoreOf(transform.Affine, 1.5, 1.5, 4),
			scoreOf(transform.TPS, 1, 1, 1),
		}, transform.TPS, "the next simpler model, affine (RMS 1.53 µm), is worse by more than one standard error"},
		// The simplest model has the lowest mean square (1 against 2):
		// it is the best, and no simpler model is there to weigh.
		{"the simplest is the best", []ModelScore{
			scoreOf(transform.Affine, 1, 1, 1),
			scoreOf(transform.TPS, 2, 2, 2),
		}, transform.Affine, "RMS 1.00 µm: the lowest leave-one-out error"},
		// A model more complex than the best is never taken, however
		// close: only simpler models are weighed against the best.
		{"a more complex model close behind", []ModelScore{
			scoreOf(transform.Similarity, 9, 9, 9),
			scoreOf(transform.Affine, 1, 1, 1),
			scoreOf(transform.TPS, 1, 1, 1.0001),
		}, transform.Affine, "the next simpler model, similarity (RMS 3.00 µm)"},
		// The failed similarity is skipped when the reason names the
		// next simpler model: rigid, RMS √16 = 4.
		{"a failed model is not named as the next simpler", []ModelScore{
			scoreOf(transform.Rigid, 16, 16, 16),
			{Model: transform.Similarity, Err: errors.New("too few pairs")},
			scoreOf(transform.Affine, 1, 1, 1),
		}, transform.Affine, "the next simpler model, rigid (RMS 4.00 µm)"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got, reason := chooseModel(tc.models)
			if got != tc.want || !strings.Contains(reason, tc.reason) {
				t.Errorf("chose %q (%s), want %q with %q", got, reason, tc.want, tc.reason)
			}
		})
	}
}

// The threshold for very many landmarks is the χ²_d quantile at the
// Bonferroni level 1 − 0.05/n, against Abramowitz & Stegun (1964), table
// 26.8 (values recalled from the table): 0.995 for n = 10, 0.999 for
// n = 50. With a million landmarks the scaled χ² differs from χ²_d by
// about d/ν ≈ 3e-6 in its mean, far below the table's three decimals.
func TestStudentisedThresholdHandbook(t *testing.T) {
	for _, tc := range []struct {
		dim, n int
		want   float64
	}{
		{2, 10, 10.597},
		{3, 10, 12.838},
		{2, 50, 13.816},
		{3, 50, 16.266},
	} {
		if got := studentisedThreshold(tc.dim, 1000000, tc.n); math.Abs(got-tc.want) > 0.002 {
			t.Errorf("dim %d, %d tests: %.4f, want %.3f", tc.dim, tc.n, got, tc.want)
		}
	}
}

// Kind weights and noises worked by hand: a kind's noise is its median
// score over the median of all unflagged scores (sample.Median, the mean
// of the two middle values of an even count), its weight 1/noise scaled so
// that the weights average 1 over the landmarks.
func TestKindWeightsWorked(t *testing.T) {
	// group is n landmarks of one kind, each with the same score.
	type group struct {
		kind  landmarks.Kind
		score float64
		n     int
	}
	v, s, o := landmarks.KindVessel, landmarks.KindSoma, landmarks.KindOther
	for _, tc := range []struct {
		name   string
		groups []group
		weight map[landmarks.Kind]float64 // nil: no weights
		noise  map[landmarks.Kind]float64
	}{
		// Ten scores, five 1s and five 2s: the 5th and 6th are 1 and 2,
		// median 1.5; noises 2/3 and 4/3, weights ∝ 3/2 and 3/4, mean
		// 9/8 → 4/3 and 2/3. Five of a kind are enough (minPerKind).
		{"five of each kind", []group{{v, 1, 5}, {s, 2, 5}},
			map[landmarks.Kind]float64{v: 4.0 / 3, s: 2.0 / 3}, map[landmarks.Kind]float64{v: 2.0 / 3, s: 4.0 / 3}},
		// Eighteen scores, six each of 1, 2, 4: the 9th and 10th are 2,
		// so noises 1/2, 1, 2; weights ∝ 2, 1, 1/2 sum to 6·3.5 = 21
		// over 18 landmarks, scaled by 18/21 → 12/7, 6/7, 3/7.
		{"three kinds", []group{{v, 1, 6}, {s, 2, 6}, {o, 4, 6}},
			map[landmarks.Kind]float64{v: 12.0 / 7, s: 6.0 / 7, o: 3.0 / 7}, map[landmarks.Kind]float64{v: 0.5, s: 1, o: 2}},
		// Somata 1.6 times as noisy, beyond weightRatio 1.5: median 1.3,
		// noises 1/1.3 and 1.6/1.3; weights ∝ 1 and 1/1.6 = 0.625, mean
		// 0.8125 → 16/13 and 10/13.
		{"ratio 1.6", []group{{v, 1, 6}, {s, 1.6, 6}},
			map[landmarks.Kind]float64{v: 16.0 / 13, s: 10.0 / 13}, map[landmarks.Kind]float64{v: 1 / 1.3, s: 1.6 / 1.3}},
		// 1.4 times as noisy is within weightRatio: no weights.
		{"ratio 1.4", []group{{v, 1, 6}, {s, 1.4, 6}}, nil, nil},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var kinds []landmarks.Kind
			var score []float64
			for _, g := range tc.groups {
				for range g.n {
					kinds, score = append(kinds, g.kind), append(score, g.score)
				}
			}
			n := len(kinds)
			p := &Problem{Dim: 3, IDs: make([]string, n), Kinds: kinds, Source: make([]transform.Vec, n), Target: make([]transform.Vec, n)}
			w, noise := kindWeights(p, score, make([]bool, n))
			if tc.weight == nil {
				if w != nil || noise != nil {
					t.Errorf("weights %v, noise %v, want none", w, noise)
				}
				return
			}
			if len(w) != n {
				t.Fatalf("%d weights for %d landmarks", len(w), n)
			}
			for i, k := range kinds {
				if math.Abs(w[i]-tc.weight[k]) > 1e-12 {
					t.Errorf("landmark %d (%s): weight %v, want %v", i, k, w[i], tc.weight[k])
				}
			}
			for k, want := range tc.noise {
				if math.Abs(noise[k]-want) > 1e-12 {
					t.Errorf("%s: noise %v, want %v", k, noise[k], want)
				}
			}
		})
	}
}
