package suggest

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sort"
	"strings"
	"testing"

	"ferry/landmarks"
	"ferry/progress"
	"ferry/register"
	"ferry/simulate"
	"ferry/transform"
)

// synthetic is a landmark problem of n pairs and a set of cells in a box of
// side 300 µm (dim 2 or 3), mapped by a rotation, a shrinkage, a smooth
// warp and an offset near 2e4 µm, with 0.7 µm of picking noise.
func synthetic(seed uint64, dim, n, cells int) (*register.Problem, []transform.Vec) {
	rng := rand.New(rand.NewPCG(seed, 99))
	truth := func(p transform.Vec) transform.Vec {
		q := transform.Vec{
			0.9*p[0] - 0.1*p[1] + 2e4 + 6*math.Sin(p[1]/70),
			0.1*p[0] + 0.92*p[1] + 1e4 + 4*math.Cos(p[0]/90),
		}
		if dim == 3 {
			q[2] = 0.8*p[2] + 3e3 + 3*math.Sin((p[0]+p[2])/80)
		}
		return q
	}
	p := &register.Problem{Dim: dim}
	for i := range n {
		var s transform.Vec
		for k := range dim {
			s[k] = 300 * rng.Float64()
		}
		q := truth(s)
		for k := range dim {
			q[k] += 0.7 * rng.NormFloat64()
		}
		p.IDs = append(p.IDs, fmt.Sprintf("L%d", i+1))
		p.Kinds = append(p.Kinds, landmarks.KindVessel)
		p.Source = append(p.Source, s)
		p.Target = append(p.Target, q)
	}
	xs := make([]transform.Vec, cells)
	for i := range xs {
		for k := range dim {
			xs[i][k] = -30 + 360*rng.Float64()
		}
	}
	return p, xs
}

// sequence collects the factors of conditionSequence at every step.
func sequence(cp transform.CrossPredictor, nu float64, dim int, xs, zs []transform.Vec) [][]transform.Mat {
	var steps [][]transform.Mat
	conditionSequence(cp, nu, dim, xs, zs, func(_ int, factor func(int) transform.Mat) {
		f := make([]transform.Mat, len(xs))
		for i := range f {
			f[i] = factor(i)
		}
		steps = append(steps, f)
	})
	return steps
}

func relDiff(a, b float64) float64 {
	return math.Abs(a-b) / math.Max(math.Max(math.Abs(a), math.Abs(b)), 1e-300)
}

func matRelDiff(a, b transform.Mat) float64 {
	d, s := 0.0, 0.0
	for i := range 3 {
		for j := range 3 {
			d = math.Max(d, math.Abs(a[i][j]-b[i][j]))
			s = math.Max(s, math.Max(math.Abs(a[i][j]), math.Abs(b[i][j])))
		}
	}
	if s == 0 {
		return 0
	}
	return d / s
}

// The cells' covariance of the search is the one `ferry map` gives, for
// every model and every combination of a cell error and stated picking
// errors.
func TestCellModelMatchesMapper(t *testing.T) {
	sc, err := simulate.Generate(simulate.SmallParams(), 3)
	if err != nil {
		t.Fatal(err)
	}
	p, cells := scenarioProblem(sc), scenarioCells(sc)
	sd := sc.Params.CellSDUM
	pick := transform.Vec{1, 1, 3}
	tsd := transform.Vec{0.3, 0.3, 0.3}
	for _, model := range []transform.Kind{transform.TPS, transform.Affine, transform.Rigid} {
		for _, picks := range []bool{false, true} {
			s := register.Settings{Model: model, Smoothing: register.Smoothing{Auto: true}}
			if picks {
				s.SourceSD, s.TargetSD = &pick, &tsd
			}
			f, _ := fitFile(t, p, s)
			u, err := uncertaintyOf(f, 3)
			if err != nil {
				t.Fatal(err)
			}
			cp, err := transform.NewCrossPredictor(f.Transform, u.Source, u.Weights)
			if err != nil {
				t.Fatal(err)
			}
			mapper, err := register.NewMapper(f)
			if err != nil {
				t.Fatal(err)
			}
			for _, own := range []*transform.Vec{nil, &sd} {
				t.Run(fmt.Sprintf("%s picks=%t cell-sd=%t", model, picks, own != nil), func(t *testing.T) {
					m := newCellModel(f.Transform, u, cells, own)
					for i, x := range cells {
						want := mapper.Map(x, own)
						got := m.covariance(i, cp.Factor(x))
						if d := matRelDiff(got, want.Cov); d > 1e-12 {
							t.Fatalf("cell %d: covariance %v, map's %v", i, got, want.Cov)
						}
						if r := m.radius(i, cp.Factor(x)); r != want.R95 {
							t.Fatalf("cell %d: r95 %.12g, map's %.12g", i, r, want.R95)
						}
					}
				})
			}
		}
	}
}

// refitted is the problem with the pairs at zs added, of the assessment's
// mean weight, fitted with the same model and smoothing; targets gives each
// new pair's target.
func refitted(t *testing.T, p *register.Problem, a *register.Assessment, zs []transform.Vec, target func(z transform.Vec) transform.Vec) (*transform.Result, []transform.Vec, []float64) {
	t.Helper()
	src := append([]transform.Vec(nil), p.Source...)
	dst := append([]transform.Vec(nil), p.Target...)
	w := append([]float64(nil), a.Weights...)
	mean := meanOf(a.Weights)
	for _, z := range zs {
		src, dst, w = append(src, z), append(dst, target(z)), append(w, mean)
	}
	res, err := transform.Fit(a.Chosen, p.Dim, src, dst, transform.Options{Weights: w, Smoothing: a.Smoothing})
	if err != nil {
		t.Fatal(err)
	}
	return res, src, w
}

// The sequential conditioning on added landmarks equals the exact
// posterior factor of the model refitted with them, at every step: with any
// targets for the spline, the translation and the affine map, whose factors
// do not depend on the targets, and with the targets the fit predicts for a
// rigid motion and a similarity (linearised about the same fit). 2-D and
// 3-D, with and without smoothing, and a spline beyond the neighbourhood
// size of `ferry map`.
func TestConditioningEqualsRefit(t *testing.T) {
	for _, tc := range []struct {
		name      string
		dim, n    int
		model     transform.Kind
		smoothing register.Smoothing
	}{
		{"3-D spline, smoothing chosen", 3, 30, transform.TPS, register.Smoothing{Auto: true}},
		{"3-D spline interpolating", 3, 30, transform.TPS, register.Smoothing{}},
		{"3-D spline of 80 landmarks", 3, 80, transform.TPS, register.Smoothing{Value: 3}},
		{"2-D spline", 2, 25, transform.TPS, register.Smoothing{Value: 400}},
		{"3-D affine", 3, 15, transform.Affine, register.Smoothing{}},
		{"2-D affine", 2, 12, transform.Affine, register.Smoothing{}},
		{"3-D translation", 3, 8, transform.Translation, register.Smoothing{}},
		{"3-D rigid", 3, 12, transform.Rigid, register.Smoothing{}},
		{"2-D similarity", 2, 10, transform.Similarity, register.Smoothing{}},
		{"3-D similarity", 3, 12, transform.Similarity, register.Smoothing{}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p, cells := synthetic(uint64(tc.n*tc.dim), tc.dim, tc.n, 40)
			f, a := fitFile(t, p, register.Settings{Model: tc.model, Smoothing: tc.smoothing})
			u, err := uncertaintyOf(f, tc.dim)
			if err != nil {
				t.Fatal(err)
			}
			cp, err := transform.NewCrossPredictor(f.Transform, u.Source, u.Weights)
			if err != nil {
				t.Fatal(err)
			}
			_, zs := synthetic(7, tc.dim, 0, 4)
			steps := sequence(cp, u.NoiseFactor, tc.dim, cells, zs)
			rng := rand.New(rand.NewPCG(1, 2))
			target := func(z transform.Vec) transform.Vec {
				q := f.Transform.Apply(z)
				if tc.model == transform.Rigid || tc.model == transform.Similarity {
					return q
				}
				for k := range tc.dim {
					q[k] += 50 * rng.NormFloat64()
				}
				return q
			}
			for k := 1; k <= len(zs); k++ {
				res, src, w := refitted(t, p, a, zs[:k], target)
				ref, err := transform.NewCrossPredictor(res.Transform, src, w)
				if err != nil {
					t.Fatal(err)
				}
				for i, x := range cells {
					want := ref.Factor(x)
					if d := matRelDiff(steps[k][i], want); d > 1e-8 {
						t.Fatalf("after %d landmarks, cell %d: factor %v, refit %v (%.3g relative)", k, i, steps[k][i], want, d)
					}
				}
			}
		})
	}
}

// End to end: the radii Suggest reports once its landmarks are added are
// the ones `ferry map` gives for the fit refitted with them (targets where
// the fit predicts them, so that the map and its Jacobian stay the same),
// to 1e-8; and the median of those is the last r95_after_um.
func TestSuggestRadiiEqualRefitMap(t *testing.T) {
	sc, err := simulate.Generate(simulate.SmallParams(), 2)
	if err != nil {
		t.Fatal(err)
	}
	p, cells := scenarioProblem(sc), scenarioCells(sc)
	for _, tc := range []struct {
		model  transform.Kind
		cellSD *transform.Vec
	}{
		{transform.TPS, &sc.Params.CellSDUM},
		{transform.TPS, nil},
		{transform.Affine, &sc.Params.CellSDUM},
		{transform.Rigid, &sc.Params.CellSDUM},
		{transform.Similarity, nil},
	} {
		t.Run(fmt.Sprintf("%s cell-sd=%t", tc.model, tc.cellSD != nil), func(t *testing.T) {
			s := register.Settings{Model: tc.model, Smoothing: register.Smoothing{Auto: true}}
			f, a := fitFile(t, p, s)
			res, err := Suggest(f, cells, Options{N: 4, CellSD: tc.cellSD})
			if err != nil {
				t.Fatal(err)
			}
			var zs []transform.Vec
			for _, sg := range res.Suggestions {
				zs = append(zs, sg.Source)
			}
			refit, src, w := refitted(t, p, a, zs, f.Transform.Apply)
			u, err := uncertaintyOf(f, 3)
			if err != nil {
				t.Fatal(err)
			}
			u.Source, u.Weights = src, w
			g := *f
			g.Transform, g.Uncertainty = refit.Transform, u
			mapper, err := register.NewMapper(&g)
			if err != nil {
				t.Fatal(err)
			}
			want := make([]float64, len(cells))
			for i, x := range cells {
				want[i] = mapper.Map(x, tc.cellSD).R95
				if d := relDiff(res.CellR95After[i], want[i]); d > 1e-8 {
					t.Fatalf("cell %d: r95 after %.12g, map of the refit %.12g", i, res.CellR95After[i], want[i])
				}
			}
			last := res.Suggestions[len(res.Suggestions)-1].R95After
			if d := relDiff(last, medianOf(want)); d > 1e-8 {
				t.Errorf("r95_after_um %.12g, median of the refit's radii %.12g", last, medianOf(want))
			}
		})
	}
}

// r95_after_um never rises with rank, the gains are the drops between
// ranks and add up, and no location is suggested twice; for every model,
// in 2-D and 3-D, from the grid and from given locations.
func TestSuggestMonotone(t *testing.T) {
	sd3, sd2 := transform.Vec{0.8, 0.8, 3}, transform.Vec{0.8, 0.8, 0}
	for _, tc := range []struct {
		dim, n int
		model  transform.Kind
		sd     *transform.Vec
		where  bool
	}{
		{3, 40, transform.TPS, &sd3, false},
		{3, 40, transform.TPS, nil, true},
		{2, 30, transform.TPS, &sd2, false},
		{3, 20, transform.Affine, &sd3, false},
		{2, 20, transform.Affine, nil, true},
		{3, 15, transform.Rigid, &sd3, true},
		{2, 15, transform.Similarity, &sd2, false},
	} {
		t.Run(fmt.Sprintf("%d-D %s sd=%t where=%t", tc.dim, tc.model, tc.sd != nil, tc.where), func(t *testing.T) {
			p, cells := synthetic(uint64(tc.n), tc.dim, tc.n, 150)
			f, _ := fitFile(t, p, register.Settings{Model: tc.model, Smoothing: register.Smoothing{Auto: true}})
			var rec progress.Recorder
			opt := Options{N: 8, CellSD: tc.sd, Progress: &rec}
			if tc.where {
				_, opt.Candidates = synthetic(5, tc.dim, 0, 300)
			}
			res, err := Suggest(f, cells, opt)
			if err != nil {
				t.Fatal(err)
			}
			if rec.Done() != len(res.Suggestions) || rec.Finished() != 1 {
				t.Errorf("progress: %d landmarks chosen reported for %d suggestions", rec.Done(), len(res.Suggestions))
			}
			if len(res.Suggestions) != opt.N {
				t.Fatalf("%d suggestions, want %d", len(res.Suggestions), opt.N)
			}
			prev, total := res.R95Before, 0.0
			seen := map[int]bool{}
			for _, s := range res.Suggestions {
				if s.R95After > prev {
					t.Errorf("rank %d: r95 after %.6f rose from %.6f", s.Rank, s.R95After, prev)
				}
				if math.Abs(s.Gain-(prev-s.R95After)) > 1e-12 {
					t.Errorf("rank %d: gain %.6f, drop %.6f", s.Rank, s.Gain, prev-s.R95After)
				}
				if seen[s.Candidate] {
					t.Errorf("candidate %d suggested twice", s.Candidate)
				}
				seen[s.Candidate] = true
				if s.Source != res.Candidates[s.Candidate] {
					t.Errorf("rank %d: source %v is not candidate %d", s.Rank, s.Source, s.Candidate)
				}
				if tc.dim == 2 && (s.Source[2] != 0 || s.Target[2] != 0) {
					t.Errorf("2-D suggestion has a z coordinate")
				}
				prev = s.R95After
				total += s.Gain
			}
			if d := math.Abs(total - (res.R95Before - prev)); d > 1e-9 {
				t.Errorf("gains add up to %.9f, the median fell by %.9f", total, res.R95Before-prev)
			}
			if !(prev < res.R95Before) {
				t.Errorf("eight landmarks did not lower the median r95 (%.4f → %.4f µm)", res.R95Before, prev)
			}
			for i, r := range res.CellR95After {
				if r > res.CellR95Before[i]*(1+1e-12) {
					t.Errorf("cell %d: r95 rose from %.6f to %.6f", i, res.CellR95Before[i], r)
				}
			}
		})
	}
}

// The greedy search's own bookkeeping (held covariances updated in place,
// or recomputed with low-rank corrections) ends where the exact sequential
// conditioning on its choices does.
func TestSearchAgreesWithSequence(t *testing.T) {
	for _, model := range []transform.Kind{transform.TPS, transform.Affine, transform.Rigid} {
		t.Run(string(model), func(t *testing.T) {
			p, cells := synthetic(11, 3, 30, 80)
			f, _ := fitFile(t, p, register.Settings{Model: model, Smoothing: register.Smoothing{Auto: true}})
			u, err := uncertaintyOf(f, 3)
			if err != nil {
				t.Fatal(err)
			}
			cp, err := transform.NewCrossPredictor(f.Transform, u.Source, u.Weights)
			if err != nil {
				t.Fatal(err)
			}
			_, cand := synthetic(12, 3, 0, 200)
			m := newCellModel(f.Transform, u, cells, nil)
			var chosen []int
			var got []transform.Mat
			if sp, ok := transform.AsScalar(cp); ok {
				s := newScalarSearch(sp, u.NoiseFactor, m, cells, cand)
				chosen = s.run(6, progress.None)
				for _, v := range s.t {
					got = append(got, scalarMat(v, 3))
				}
			} else {
				s := newBlockSearch(cp, u.NoiseFactor, m, cells, cand)
				chosen = s.run(6, progress.None)
				got = s.fx
			}
			var zs []transform.Vec
			for _, j := range chosen {
				zs = append(zs, cand[j])
			}
			steps := sequence(cp, u.NoiseFactor, 3, cells, zs)
			for i := range cells {
				if d := matRelDiff(got[i], steps[len(zs)][i]); d > 1e-9 {
					t.Fatalf("cell %d: search ends at %v, sequence at %v", i, got[i], steps[len(zs)][i])
				}
			}
		})
	}
}

func TestGrid(t *testing.T) {
	for _, tc := range []struct {
		name   string
		dim    int
		lo, hi transform.Vec
		target int
	}{
		{"cube", 3, transform.Vec{0, 0, 0}, transform.Vec{600, 600, 400}, 4000},
		{"far from the origin", 3, transform.Vec{2e4, 1e4, 3e3}, transform.Vec{2e4 + 300, 1e4 + 500, 3e3 + 60}, 4000},
		{"thin slab", 3, transform.Vec{0, 0, 0}, transform.Vec{1000, 1000, 2}, 4000},
		{"flat box", 3, transform.Vec{0, 0, 5}, transform.Vec{100, 200, 5}, 1000},
		{"square", 2, transform.Vec{-50, -50}, transform.Vec{250, 150}, 4000},
		{"few", 3, transform.Vec{0, 0, 0}, transform.Vec{10, 10, 10}, 1},
	} {
		t.Run(tc.name, func(t *testing.T) {
			nodes, h, err := Grid(tc.dim, tc.lo, tc.hi, tc.target)
			if err != nil {
				t.Fatal(err)
			}
			if len(nodes) < tc.target {
				t.Fatalf("%d nodes, want at least %d", len(nodes), tc.target)
			}
			if tc.target > 1 && len(nodes) > 3*tc.target {
				t.Errorf("%d nodes for a target of %d", len(nodes), tc.target)
			}
			// h is the largest spacing that gives target nodes.
			if more, _, _ := Grid(tc.dim, tc.lo, tc.hi, len(nodes)+1); len(more) <= len(nodes) {
				t.Errorf("asking for one node more gave %d", len(more))
			}
			var lo, hi transform.Vec
			lo, hi = Bounds(tc.dim, nodes)
			for k := range tc.dim {
				if lo[k] < tc.lo[k]-1e-9 || hi[k] > tc.hi[k]+1e-9 {
					t.Fatalf("nodes span %v–%v outside the box %v–%v", lo, hi, tc.lo, tc.hi)
				}
				// Centred: equal margins on both sides.
				if d := math.Abs((lo[k] - tc.lo[k]) - (tc.hi[k] - hi[k])); d > 1e-9*(1+math.Abs(tc.hi[k])) {
					t.Errorf("axis %d: margins %.6g and %.6g", k, lo[k]-tc.lo[k], tc.hi[k]-hi[k])
				}
				if margin := lo[k] - tc.lo[k]; margin > h/2+1e-9 {
					t.Errorf("axis %d: margin %.6g beyond half the spacing %.6g", k, margin, h)
				}
			}
			if tc.dim == 2 {
				for _, p := range nodes {
					if p[2] != 0 {
						t.Fatal("2-D node with a z coordinate")
					}
				}
			}
		})
	}
	for _, tc := range []struct {
		name   string
		dim    int
		lo, hi transform.Vec
	}{
		{"one point", 3, transform.Vec{1, 2, 3}, transform.Vec{1, 2, 3}},
		{"inverted", 3, transform.Vec{1, 0, 0}, transform.Vec{0, 1, 1}},
		{"empty", 3, transform.Vec{math.Inf(1), math.Inf(1), math.Inf(1)}, transform.Vec{math.Inf(-1), math.Inf(-1), math.Inf(-1)}},
		{"dimension", 4, transform.Vec{}, transform.Vec{1, 1, 1}},
	} {
		t.Run("refuses "+tc.name, func(t *testing.T) {
			if _, _, err := Grid(tc.dim, tc.lo, tc.hi, 100); err == nil {
				t.Fatal("no error")
			}
		})
	}
}

func TestSelectMedian(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for n := 1; n <= 60; n++ {
		for _, levels := range []int{2, 5, 1000} {
			v := make([]float64, n)
			for i := range v {
				v[i] = float64(rng.IntN(levels))
			}
			s := slices.Clone(v)
			sort.Float64s(s)
			want := s[n/2]
			if n%2 == 0 {
				want = 0.5 * (s[n/2-1] + s[n/2])
			}
			if got := selectMedian(v); got != want {
				t.Fatalf("n=%d levels=%d: median %g, want %g", n, levels, got, want)
			}
		}
	}
}

func TestSuggestRefuses(t *testing.T) {
	p, cells := synthetic(1, 3, 20, 10)
	f, _ := fitFile(t, p, register.Settings{Model: transform.Affine})
	bare := *f
	bare.Uncertainty = nil
	nan := append(slices.Clone(cells), transform.Vec{math.NaN(), 0, 0})
	for _, tc := range []struct {
		name  string
		f     *register.Registration
		cells []transform.Vec
		opt   Options
		want  string
	}{
		{"no transform", nil, cells, Options{}, "no transform"},
		{"no cells", f, nil, Options{}, "no cells"},
		{"negative count", f, cells, Options{N: -2}, "positive"},
		{"a cell not a number", f, nan, Options{}, "cell 11"},
		{"a candidate not a number", f, cells, Options{Candidates: nan}, "candidate location 11"},
		{"no candidates", f, cells, Options{Candidates: []transform.Vec{}}, "no candidate"},
		{"no uncertainty model", &bare, cells, Options{}, "uncertainty model"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Suggest(tc.f, tc.cells, tc.opt)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %v, want one containing %q", err, tc.want)
			}
		})
	}
}

// Fewer candidates than asked for give as many suggestions as there are.
func TestSuggestRunsOutOfCandidates(t *testing.T) {
	p, cells := synthetic(2, 3, 25, 30)
	f, _ := fitFile(t, p, register.Settings{Model: transform.TPS, Smoothing: register.Smoothing{Value: 2}})
	_, cand := synthetic(3, 3, 0, 3)
	res, err := Suggest(f, cells, Options{N: 5, Candidates: cand})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Suggestions) != 3 {
		t.Fatalf("%d suggestions from 3 candidates", len(res.Suggestions))
	}
}

// The table and the JSON carry the contract's columns, without z in 2-D,
// with where_id and the points file's extra columns for given locations,
// target positions in target voxels when the landmarks were; and the same
// input gives the same bytes.
func TestWrite(t *testing.T) {
	for _, tc := range []struct {
		name  string
		dim   int
		where bool
		voxel bool
		want  string
	}{
		{"3-D grid", 3, false, false, "rank,x,y,z,target_x,target_y,target_z,r95_after_um,gain_um,mean_r95_after_um,target_r95_um,target_sd_x_um,target_sd_y_um,target_sd_z_um,status,source_x_um,source_y_um,source_z_um,target_x_um,target_y_um,target_z_um"},
		{"2-D grid", 2, false, false, "rank,x,y,target_x,target_y,r95_after_um,gain_um,mean_r95_after_um,target_r95_um,target_sd_x_um,target_sd_y_um,status,source_x_um,source_y_um,target_x_um,target_y_um"},
		{"3-D where in voxels", 3, true, true, "rank,x,y,z,target_x,target_y,target_z,r95_after_um,gain_um,mean_r95_after_um,target_r95_um,target_sd_x_um,target_sd_y_um,target_sd_z_um,status,source_x_um,source_y_um,source_z_um,target_x_um,target_y_um,target_z_um,where_id,depth_class"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p, cells := synthetic(4, tc.dim, 25, 50)
			f, _ := fitFile(t, p, register.Settings{Model: transform.TPS, Smoothing: register.Smoothing{Value: 5}})
			opt := Options{N: 3}
			out := Output{Provenance: register.Provenance{Command: "suggest", Flags: []string{"--n=3"}}}
			if tc.where {
				_, pts := synthetic(6, tc.dim, 0, 40)
				set := &landmarks.PointSet{Dim: tc.dim, ExtraColumns: []string{"depth_class"}}
				for i, q := range pts {
					set.Points = append(set.Points, landmarks.Point{ID: fmt.Sprintf("b%02d", i), Pos: q, Extra: []string{fmt.Sprint(i % 3)}})
				}
				opt.Candidates, out.Where = pts, set
			}
			if tc.voxel {
				out.SourceVoxel, out.TargetVoxel = &transform.Vec{0.5, 0.5, 2}, &transform.Vec{0.008, 0.008, 0.04}
			}
			var first []byte
			for run := range 2 {
				res, err := Suggest(f, cells, opt)
				if err != nil {
					t.Fatal(err)
				}
				var b bytes.Buffer
				if err := res.WriteCSV(&b, out); err != nil {
					t.Fatal(err)
				}
				if run == 0 {
					first = b.Bytes()
					lines := strings.Split(strings.TrimSpace(b.String()), "\n")
					if lines[0] != tc.want {
						t.Errorf("header\n%s\nwant\n%s", lines[0], tc.want)
					}
					if len(lines) != 1+len(res.Suggestions) {
						t.Errorf("%d lines for %d suggestions", len(lines), len(res.Suggestions))
					}
					row := strings.Split(lines[1], ",")
					if row[0] != "1" {
						t.Errorf("first row has rank %q", row[0])
					}
					s := res.Suggestions[0]
					src, dst := s.Source, s.Target
					if tc.voxel {
						src[0] /= 0.5
						dst[0] /= 0.008
					}
					if row[1] != formatNumber(src[0]) || row[1+tc.dim] != formatNumber(dst[0]) {
						t.Errorf("first row %v: want x %s and target_x %s", row, formatNumber(src[0]), formatNumber(dst[0]))
					}
					// The micrometre columns hold the positions in µm
					// whatever the units of x and target_x.
					um := strings.Split(lines[0], ",")
					for k, name := range um {
						switch name {
						case "source_x_um":
							if row[k] != formatNumber(s.Source[0]) {
								t.Errorf("source_x_um %s, want %s", row[k], formatNumber(s.Source[0]))
							}
						case "target_x_um":
							if row[k] != formatNumber(s.Target[0]) {
								t.Errorf("target_x_um %s, want %s", row[k], formatNumber(s.Target[0]))
							}
						}
					}
					if tc.where {
						if want := out.Where.Points[s.Candidate].ID; row[len(row)-2] != want {
							t.Errorf("where_id %q, want %q", row[len(row)-2], want)
						}
					}
					js, err := json.Marshal(res.JSON(out))
					if err != nil {
						t.Fatal(err)
					}
					var back map[string]any
					if err := json.Unmarshal(js, &back); err != nil {
						t.Fatal(err)
					}
					sug := back["suggestions"].([]any)[0].(map[string]any)
					if _, hasZ := sug["z"]; hasZ != (tc.dim == 3) {
						t.Errorf("JSON suggestion %v: z present %t in %d-D", sug, hasZ, tc.dim)
					}
					if _, hasWhere := sug["where_id"]; hasWhere != tc.where {
						t.Errorf("JSON suggestion %v: where_id present %t", sug, hasWhere)
					}
					if sug["r95_after_um"].(float64) != round4(s.R95After) {
						t.Errorf("JSON r95_after_um %v, table %s", sug["r95_after_um"], formatNumber(s.R95After))
					}
				} else if !bytes.Equal(first, b.Bytes()) {
					t.Error("the same input gave a different table")
				}
			}
		})
	}
}

// The scalar search's pruning by counts chooses exactly what scoring every
// candidate in full would, with and without a cell error, for the spline
// and the affine map.
func TestPruningChoosesAsFullScoring(t *testing.T) {
	sd := transform.Vec{0.8, 0.8, 3}
	for _, tc := range []struct {
		model transform.Kind
		sd    *transform.Vec
		cells int
	}{
		{transform.TPS, &sd, 301},
		{transform.TPS, nil, 300},
		{transform.Affine, &sd, 120},
	} {
		t.Run(fmt.Sprintf("%s sd=%t cells=%d", tc.model, tc.sd != nil, tc.cells), func(t *testing.T) {
			p, cells := synthetic(31, 3, 40, tc.cells)
			f, _ := fitFile(t, p, register.Settings{Model: tc.model, Smoothing: register.Smoothing{Value: 4}})
			u, err := uncertaintyOf(f, 3)
			if err != nil {
				t.Fatal(err)
			}
			cp, err := transform.NewCrossPredictor(f.Transform, u.Source, u.Weights)
			if err != nil {
				t.Fatal(err)
			}
			sp, _ := transform.AsScalar(cp)
			_, cand := synthetic(32, 3, 0, 600)
			m := newCellModel(f.Transform, u, cells, tc.sd)
			got := newScalarSearch(sp, u.NoiseFactor, m, cells, cand).run(6, progress.None)
			ref := newScalarSearch(sp, u.NoiseFactor, m, cells, cand)
			r := make([]float64, len(cells))
			var want []int
			for range 6 {
				scores := make([]score, len(cand))
				for j := range cand {
					if !ref.chosen[j] {
						scores[j] = ref.score(j, r)
					}
				}
				j := best(scores)
				ref.add(j)
				want = append(want, j)
			}
			if !slices.Equal(got, want) {
				t.Fatalf("pruned search chose %v, full scoring %v", got, want)
			}
		})
	}
}
