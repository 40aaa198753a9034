package register

import (
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"sort"
	"strconv"
	"strings"
	"testing"

	"ferry/transform"
)

// Handbook values of the chi-square distribution's 0.95 quantile
// (Abramowitz & Stegun 1964, table 26.8; the same as
// scipy.stats.chi2.ppf(0.95, k) in Debian's python3-scipy 1.10):
// k=1: 3.841459, k=2: 5.991465, k=3: 7.814728.
func TestChiSquareQuantileHandbook(t *testing.T) {
	for _, tc := range []struct {
		k    int
		want float64
	}{{1, 3.841459}, {2, 5.991465}, {3, 7.814728}} {
		if got := chiSquareQuantile(tc.k, 0.95); math.Abs(got-tc.want) > 1e-6 {
			t.Errorf("χ²_%d(0.95) = %.7f, want %.6f", tc.k, got, tc.want)
		}
	}
}

// An isotropic covariance σ²I has r95 = σ·sqrt(χ²_d(0.95)) exactly.
func TestRadiusIsotropic(t *testing.T) {
	for _, dim := range []int{2, 3} {
		table := NewRadiusTable(dim, 0.95)
		sigma := 2.5
		cov := transform.Mat{{sigma * sigma, 0, 0}, {0, sigma * sigma, 0}, {0, 0, sigma * sigma}}
		want := sigma * math.Sqrt(chiSquareQuantile(dim, 0.95))
		if got := table.Radius(cov); math.Abs(got-want) > 1e-6*want {
			t.Errorf("%d-D isotropic r95 = %.7f, want %.7f", dim, got, want)
		}
	}
}

// Anisotropic and rotated covariances against a Monte Carlo estimate of the
// same quantile (seeded; 4e5 draws give a relative standard error of about
// 0.1 % on a 95 % quantile).
func TestRadiusAgainstMonteCarlo(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	cases := []struct {
		name string
		dim  int
		sd   transform.Vec
	}{
		{"in vivo z four times worse", 3, transform.Vec{1, 1, 4}},
		{"three different axes", 3, transform.Vec{0.5, 1.7, 3.1}},
		{"nearly flat", 3, transform.Vec{2, 2, 0.05}},
		{"2-D elongated", 2, transform.Vec{0.7, 3}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			// A random rotation, so the table must not rely on axis-aligned input.
			r := randomRotation(rng, tc.dim)
			var d transform.Mat
			for i := range tc.dim {
				d[i][i] = tc.sd[i] * tc.sd[i]
			}
			cov := r.Mul(d).Mul(r.T())
			got := NewRadiusTable(tc.dim, 0.95).Radius(cov)
			const n = 400000
			r2 := make([]float64, n)
			for k := range r2 {
				s := 0.0
				for i := range tc.dim {
					z := rng.NormFloat64() * tc.sd[i]
					s += z * z
				}
				r2[k] = s
			}
			sort.Float64s(r2)
			want := math.Sqrt(r2[int(0.95*n)])
			if math.Abs(got-want) > 0.005*want {
				t.Errorf("r95 = %.4f µm, Monte Carlo %.4f µm", got, want)
			}
		})
	}
}

func randomRotation(rng *rand.Rand, dim int) transform.Mat {
	if dim == 2 {
		a := rng.Float64() * 2 * math.Pi
		return transform.Mat{{math.Cos(a), -math.Sin(a), 0}, {math.Sin(a), math.Cos(a), 0}, {0, 0, 1}}
	}
	// A unit quaternion drawn uniformly gives a uniform rotation.
	q := [4]float64{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
	n := math.Sqrt(q[0]*q[0] + q[1]*q[1] + q[2]*q[2] + q[3]*q[3])
	w, x, y, z := q[0]/n, q[1]/n, q[2]/n, q[3]/n
	return transform.Mat{
		{1 - 2*(y*y+z*z), 2 * (x*y - w*z), 2 * (x*z + w*y)},
		{2 * (x*y + w*z), 1 - 2*(x*x+z*z), 2 * (y*z - w*x)},
		{2 * (x*z - w*y), 2 * (y*z + w*x), 1 - 2*(x*x+y*y)},
	}
}

func BenchmarkRadiusTable(b *testing.B) {
	for b.Loop() {
		NewRadiusTable(3, 0.95)
	}
}

func BenchmarkRadius(b *testing.B) {
	table := NewRadiusTable(3, 0.95)
	cov := transform.Mat{{1, 0.2, 0}, {0.2, 2, 0.3}, {0, 0.3, 9}}
	for b.Loop() {
		table.Radius(cov)
	}
}

// The quadrature order in use agrees with a much finer rule over the whole
// table's range of eigenvalue ratios.
func TestSphereRuleConverged(t *testing.T) {
	for _, dim := range []int{2, 3} {
		coarse, fine := newSphereRule(dim), newSphereRuleOrder(dim, 64, 48)
		worst := 0.0
		for a := 0; a <= radiusGrid; a += 2 {
			for b := 0; b <= radiusGrid; b += 2 {
				lam := [3]float64{1, float64(a) / radiusGrid, float64(a*b) / radiusGrid / radiusGrid}
				c, f := coarse.quantile(lam, 0.95), fine.quantile(lam, 0.95)
				worst = max(worst, abs(c-f)/f)
			}
		}
		if worst > 1e-5 {
			t.Errorf("%d-D: coarse rule off the fine one by %.2g relative", dim, worst)
		}
	}
}

func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}

// Between the table's nodes the interpolated radius stays within 0.2 % of the
// directly computed one.
func TestRadiusInterpolation(t *testing.T) {
	for _, dim := range []int{2, 3} {
		table := NewRadiusTable(dim, 0.95)
		rule := newSphereRule(dim)
		worst := 0.0
		for a := 0.5; a < radiusGrid; a += 3 {
			for b := 0.5; b < radiusGrid; b += 3 {
				if dim == 2 {
					b = 0
				}
				l2, l3 := a/radiusGrid, a/radiusGrid*b/radiusGrid
				cov := transform.Mat{{1, 0, 0}, {0, l2, 0}, {0, 0, l3}}
				want := math.Sqrt(rule.quantile([3]float64{1, l2, l3}, 0.95))
				worst = max(worst, abs(table.Radius(cov)-want)/want)
				if dim == 2 {
					break
				}
			}
		}
		if worst > 0.002 {
			t.Errorf("%d-D: interpolated r95 off by %.3g relative", dim, worst)
		}
	}
}

var updateRadius = flag.Bool("update-radius", false, "rewrite radius_table.go from the integration")

// The committed table of Radius95 is what NewRadiusTable computes now.
// Regenerate with: go test ./register -run Radius95TableCurrent -update-radius
func TestRadius95TableCurrent(t *testing.T) {
	t2, t3 := NewRadiusTable(2, 0.95), NewRadiusTable(3, 0.95)
	if *updateRadius {
		var b strings.Builder
		b.WriteString("// Code generated by TestRadius95TableCurrent -update-radius; DO NOT EDIT.\n\npackage register\n")
		for _, tc := range []struct {
			name string
			g    *[radiusGrid + 1][radiusGrid + 1]float64
		}{{"radius95Table2D", &t2.g}, {"radius95Table3D", &t3.g}} {
			fmt.Fprintf(&b, "\nfunc %s() [radiusGrid + 1][radiusGrid + 1]float64 {\n\treturn [radiusGrid + 1][radiusGrid + 1]float64{\n", tc.name)
			for _, row := range tc.g {
				b.WriteString("\t\t{")
				for j, v := range row {
					if j > 0 {
						b.WriteString(", ")
					}
					b.WriteString(strconv.FormatFloat(v, 'g', 17, 64))
				}
				b.WriteString("},\n")
			}
			b.WriteString("\t}\n}\n")
		}
		if err := os.WriteFile("radius_table.go", []byte(b.String()), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	for dim, want := range map[int]*RadiusTable{2: t2, 3: t3} {
		got := Radius95(dim)
		for i := range got.g {
			for j := range got.g[i] {
				if math.Abs(got.g[i][j]-want.g[i][j]) > 1e-12*want.g[i][j] {
					t.Fatalf("%d-D table at (%d,%d): committed %v, computed %v; regenerate it", dim, i, j, got.g[i][j], want.g[i][j])
				}
			}
		}
	}
}
