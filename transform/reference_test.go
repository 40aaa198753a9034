package transform

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// rbfReference is testdata/reference/rbf_reference.json, written by
// testdata/reference/rbf_reference.py from SciPy's RBFInterpolator (kernel
// 'linear' in 3-D, 'thin_plate_spline' in 2-D, degree 1), which solves the
// contract's system in raw micrometre coordinates with the smoothing on the
// kernel diagonal. Python is not needed here: the test reads the committed
// values.
type rbfReference struct {
	Scipy string `json:"scipy"`
	Cases []struct {
		Name      string      `json:"name"`
		Dim       int         `json:"dim"`
		Kernel    string      `json:"kernel"`
		Smoothing float64     `json:"smoothing"`
		Weights   []float64   `json:"weights"`
		Source    [][]float64 `json:"source"`
		Target    [][]float64 `json:"target"`
		Query     [][]float64 `json:"query"`
		Predicted [][]float64 `json:"predicted"`
	} `json:"cases"`
}

func vecs(t *testing.T, dim int, rows [][]float64) []Vec {
	t.Helper()
	v := make([]Vec, len(rows))
	for i, r := range rows {
		if len(r) != dim {
			t.Fatalf("row %d has %d coordinates in a %d-D case", i, len(r), dim)
		}
		copy(v[i][:], r)
	}
	return v
}

// TestSplineMatchesSciPy checks the normalised solve — including the
// conversion of S to normalised units, S/s in 3-D and S/s² in 2-D, and the
// weighted smoothing S·w̄/w_i — against SciPy to 1e-8 of the range of the
// predicted values.
func TestSplineMatchesSciPy(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("..", "testdata", "reference", "rbf_reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref rbfReference
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatalf("rbf_reference.json: %v", err)
	}
	if len(ref.Cases) < 6 {
		t.Fatalf("rbf_reference.json has %d cases, want at least 6", len(ref.Cases))
	}
	for _, c := range ref.Cases {
		t.Run(c.Name, func(t *testing.T) {
			wantKernel := map[int]string{2: "thin_plate_spline", 3: "linear"}[c.Dim]
			if c.Kernel != wantKernel {
				t.Fatalf("kernel %q in %d-D: the contract's is %q", c.Kernel, c.Dim, wantKernel)
			}
			src, dst := vecs(t, c.Dim, c.Source), vecs(t, c.Dim, c.Target)
			query, want := vecs(t, c.Dim, c.Query), vecs(t, c.Dim, c.Predicted)
			_, sp := fitSplineT(t, c.Dim, src, dst, Options{Smoothing: c.Smoothing, Weights: c.Weights})
			span := 0.0
			for k := range c.Dim {
				lo, hi := math.Inf(1), math.Inf(-1)
				for _, w := range want {
					lo, hi = math.Min(lo, w[k]), math.Max(hi, w[k])
				}
				span = math.Max(span, hi-lo)
			}
			worst := 0.0
			for i, q := range query {
				got := sp.Apply(q)
				for k := range c.Dim {
					d := math.Abs(got[k] - want[i][k])
					worst = math.Max(worst, d)
					if d > 1e-8*span {
						t.Errorf("query %d axis %d: spline %.12g, SciPy %s %.12g (|Δ| = %.3g µm, range %.3g µm)", i, k, got[k], ref.Scipy, want[i][k], d, span)
					}
				}
			}
			t.Logf("largest difference from SciPy %.3g µm of a %.3g µm range", worst, span)
		})
	}
}
