package match

import (
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"strings"
	"testing"

	"ferry/progress"
	"ferry/register"
	"ferry/simulate"
	"ferry/status"
	"ferry/transform"
)

// lattice is a jittered grid of candidates, spacing µm apart, filling
// [0, size] on each axis, less those inside any of the holes (centre,
// radius).
func lattice(size, spacing float64, holes ...[4]float64) []transform.Vec {
	rng := rand.New(rand.NewPCG(7, 8))
	var out []transform.Vec
	n := int(size/spacing) + 1
	for i := range n {
		for j := range n {
			for k := range n {
				p := transform.Vec{float64(i), float64(j), float64(k)}.Scale(spacing)
				for a := range 3 {
					p[a] += 0.2 * spacing * (rng.Float64() - 0.5)
				}
				inHole := false
				for _, h := range holes {
					if p.Sub(transform.Vec{h[0], h[1], h[2]}).Norm() < h[3] {
						inHole = true
					}
				}
				if !inHole {
					out = append(out, p)
				}
			}
		}
	}
	return out
}

// mappedAt is a cell mapped to pos with an isotropic error of sd µm.
func mappedAt(pos transform.Vec, sd float64) register.Mapped {
	var cov transform.Mat
	for k := range 3 {
		cov[k][k] = sd * sd
	}
	return register.Mapped{Pos: pos, Cov: cov, SD: transform.Vec{sd, sd, sd}, R95: register.NewRadiusTable(3, 0.95).Radius(cov), Status: status.OK}
}

func runMapped(t *testing.T, mapped []register.Mapped, cands []transform.Vec, opt Options) []Result {
	t.Helper()
	opt, err := opt.withDefaults(len(mapped), len(cands))
	if err != nil {
		t.Fatal(err)
	}
	res, err := matchMapped(mapped, cands, opt)
	if err != nil {
		t.Fatal(err)
	}
	checkInvariants(t, res, len(cands))
	return res
}

// checkInvariants: no candidate twice, probabilities that add up, statuses
// that agree with the choice.
func checkInvariants(t testing.TB, res []Result, nCands int) {
	t.Helper()
	taken := map[int]int{}
	for i, r := range res {
		if r.Candidate >= 0 {
			if other, ok := taken[r.Candidate]; ok {
				t.Errorf("candidate %d assigned to cells %d and %d", r.Candidate, other, i)
			}
			taken[r.Candidate] = i
			if r.Candidate >= nCands {
				t.Errorf("cell %d: candidate %d of %d", i, r.Candidate, nCands)
			}
		}
		for _, p := range []float64{r.PMatch, r.PNone, r.PRunnerUp} {
			if !(p >= 0 && p <= 1) {
				t.Errorf("cell %d: probability %v", i, p)
			}
		}
		if r.Candidate >= 0 && r.PMatch+r.PNone+r.PRunnerUp > 1+1e-9 {
			t.Errorf("cell %d: p_match %v + p_none %v + p_runner_up %v > 1", i, r.PMatch, r.PNone, r.PRunnerUp)
		}
		if r.RunnerUp >= 0 && r.RunnerUp == r.Candidate {
			t.Errorf("cell %d: the runner-up is the match", i)
		}
		switch {
		case r.Candidate < 0 && r.Status != status.Unmatched:
			t.Errorf("cell %d: no candidate but status %s", i, r.Status)
		case r.Candidate >= 0 && r.Status == status.Unmatched:
			t.Errorf("cell %d: candidate %d but unmatched", i, r.Candidate)
		case r.Status == status.Matched && r.PMatch < DefaultMinPMatch:
			t.Errorf("cell %d: matched with p %v", i, r.PMatch)
		}
	}
}

func TestMatchCases(t *testing.T) {
	base := lattice(150, 15)
	centre := transform.Vec{75, 75, 75}
	holey := lattice(150, 15, [4]float64{75, 75, 75, 40})
	for _, tc := range []struct {
		name   string
		cands  []transform.Vec
		extra  []transform.Vec // appended to cands
		cells  []register.Mapped
		check  func(t *testing.T, res []Result, cands []transform.Vec)
		idsRev bool // name the candidates in reverse order
	}{
		{
			name: "cell on a candidate", cands: base,
			cells: []register.Mapped{mappedAt(base[555].Add(transform.Vec{0.5, -0.3, 0.8}), 1)},
			check: func(t *testing.T, res []Result, cands []transform.Vec) {
				r := res[0]
				if r.Status != status.Matched || r.Candidate != 555 {
					t.Errorf("got %s candidate %d (p %.4f), want matched 555", r.Status, r.Candidate, r.PMatch)
				}
				if want := (transform.Vec{0.5, -0.3, 0.8}).Norm(); math.Abs(r.DistanceUM-want) > 1e-9 {
					t.Errorf("distance %v µm, want %v", r.DistanceUM, want)
				}
			},
		},
		{
			name: "two candidates equally near", cands: holey,
			extra: []transform.Vec{centre.Add(transform.Vec{3, 0, 0}), centre.Sub(transform.Vec{3, 0, 0})},
			cells: []register.Mapped{mappedAt(centre, 1.5)},
			check: func(t *testing.T, res []Result, cands []transform.Vec) {
				r := res[0]
				a, b := len(cands)-2, len(cands)-1
				if r.Status != status.Ambiguous || r.Candidate != a || r.RunnerUp != b {
					t.Errorf("got %s %d, runner-up %d; want ambiguous %d, runner-up %d (the lower index)", r.Status, r.Candidate, r.RunnerUp, a, b)
				}
				if math.Abs(r.PMatch-r.PRunnerUp) > 1e-9 {
					t.Errorf("p %v and %v of equally near candidates differ", r.PMatch, r.PRunnerUp)
				}
			},
		},
		{
			name: "tie broken by id", cands: holey, idsRev: true,
			extra: []transform.Vec{centre.Add(transform.Vec{3, 0, 0}), centre.Sub(transform.Vec{3, 0, 0})},
			cells: []register.Mapped{mappedAt(centre, 1.5)},
			check: func(t *testing.T, res []Result, cands []transform.Vec) {
				// Named in reverse, the last candidate has the lowest id.
				if r := res[0]; r.Candidate != len(cands)-1 {
					t.Errorf("got candidate %d, want %d, the lower id", r.Candidate, len(cands)-1)
				}
			},
		},
		{
			name: "outside the volume", cands: base,
			// 60 µm beyond the face, r95 34 µm: candidates in reach, but
			// outside by more than r95 even with the volume's margin.
			cells: []register.Mapped{mappedAt(transform.Vec{75, 75, 150 + 60}, 12)},
			check: func(t *testing.T, res []Result, cands []transform.Vec) {
				r := res[0]
				if r.Status != status.Unmatched || !r.Outside || r.Candidate != -1 || r.PMatch != 1 {
					t.Errorf("got %s outside %v candidate %d p %v, want unmatched outside, p 1", r.Status, r.Outside, r.Candidate, r.PMatch)
				}
				if !(r.DistanceUM > 55 && r.DistanceUM < 65) {
					t.Errorf("distance to the nearest candidate %v µm, want about 60", r.DistanceUM)
				}
			},
		},
		{
			name: "just outside the volume, uncertain", cands: base,
			cells: []register.Mapped{mappedAt(transform.Vec{75, 75, 150 + 4}, 6)},
			check: func(t *testing.T, res []Result, cands []transform.Vec) {
				if r := res[0]; r.Status == status.Matched || r.Outside {
					t.Errorf("got %s (outside %v, p %.4f); a cell this near the face is neither matched nor ruled out", r.Status, r.Outside, r.PMatch)
				}
			},
		},
		{
			name: "in a hole", cands: holey,
			cells: []register.Mapped{mappedAt(centre, 2)},
			check: func(t *testing.T, res []Result, cands []transform.Vec) {
				r := res[0]
				if r.Status != status.Unmatched || r.InReach != 0 || r.Outside {
					t.Errorf("got %s with %d in reach (outside %v), want unmatched with none in reach", r.Status, r.InReach, r.Outside)
				}
			},
		},
		{
			name: "two cells, one candidate", cands: holey,
			extra: []transform.Vec{centre},
			cells: []register.Mapped{mappedAt(centre.Add(transform.Vec{0, 0, 4}), 1.5), mappedAt(centre.Add(transform.Vec{0, 0, -1}), 1.5)},
			check: func(t *testing.T, res []Result, cands []transform.Vec) {
				c := len(cands) - 1
				if res[1].Candidate != c || res[0].Candidate == c {
					t.Errorf("got candidates %d and %d; want the nearer cell (2) to take %d", res[0].Candidate, res[1].Candidate, c)
				}
				if res[0].Status != status.Unmatched {
					t.Errorf("the farther cell is %s, want unmatched", res[0].Status)
				}
			},
		},
		{
			name: "no candidates", cands: nil,
			cells: []register.Mapped{mappedAt(centre, 2)},
			check: func(t *testing.T, res []Result, cands []transform.Vec) {
				r := res[0]
				if r.Status != status.Unmatched || !math.IsNaN(r.DistanceUM) || r.RunnerUp != -1 {
					t.Errorf("got %s distance %v runner-up %d, want unmatched, no distance, no runner-up", r.Status, r.DistanceUM, r.RunnerUp)
				}
			},
		},
	} {
		t.Run(tc.name, func(t *testing.T) {
			cands := append(slices.Clone(tc.cands), tc.extra...)
			var opt Options
			if tc.idsRev {
				opt.CandidateIDs = make([]string, len(cands))
				for j := range cands {
					opt.CandidateIDs[j] = string(rune('A'+(len(cands)-1-j)/676)) + string(rune('A'+(len(cands)-1-j)/26%26)) + string(rune('A'+(len(cands)-1-j)%26))
				}
			}
			tc.check(t, runMapped(t, tc.cells, cands, opt), cands)
		})
	}
}

func TestMatch2D(t *testing.T) {
	var cands []transform.Vec
	for i := range 20 {
		for j := range 20 {
			cands = append(cands, transform.Vec{float64(i) * 12, float64(j) * 12, 0})
		}
	}
	var cov transform.Mat
	cov[0][0], cov[1][1] = 1, 1
	cells := []register.Mapped{
		{Pos: transform.Vec{121, 119, 0}, Cov: cov, R95: 2.45, Status: status.OK},  // on candidate (10, 10)
		{Pos: transform.Vec{300, 120, 0}, Cov: cov, R95: 2.45, Status: status.OK},  // far outside
		{Pos: transform.Vec{184, 180, 0}, Cov: cov, R95: 2.45, Status: status.OK},  // 4 µm from one: no match is likely too
		{Pos: transform.Vec{60, 60, 5000}, Cov: cov, R95: 2.45, Status: status.OK}, // z is ignored
	}
	var rec progress.Recorder
	res := runMapped(t, cells, cands, Options{Dim: 2, PriorCounterpart: 0.9, Progress: &rec})
	if rec.Done() != len(cells) || rec.Finished() != 1 {
		t.Errorf("progress: %d of %d cells reported, %d stages finished", rec.Done(), len(cells), rec.Finished())
	}
	want := []status.Status{status.Matched, status.Unmatched, status.Ambiguous, status.Matched}
	for i, r := range res {
		if r.Status != want[i] {
			t.Errorf("cell %d: %s (candidate %d, p %.4f), want %s", i, r.Status, r.Candidate, r.PMatch, want[i])
		}
	}
	if res[0].Candidate != 10*20+10 || res[3].Candidate != 5*20+5 {
		t.Errorf("candidates %d and %d, want %d and %d", res[0].Candidate, res[3].Candidate, 10*20+10, 5*20+5)
	}
}

func TestOptionsRefused(t *testing.T) {
	for _, tc := range []struct {
		opt  Options
		want string
	}{
		{Options{Dim: 4}, "dimension 4"},
		{Options{CandidateSD: -1}, "candidate standard deviation"},
		{Options{CandidateSD: math.Inf(1)}, "candidate standard deviation"},
		{Options{PriorCounterpart: 1}, "prior probability"},
		{Options{PriorCounterpart: -0.1}, "prior probability"},
		{Options{MinPMatch: 0.4}, "least probability"},
		{Options{MinPMatch: 1}, "least probability"},
		{Options{CellIDs: []string{"a"}}, "1 cell ids for 2 cells"},
		{Options{CandidateIDs: []string{"a", "b"}}, "2 candidate ids for 3 candidates"},
	} {
		_, err := tc.opt.withDefaults(2, 3)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%+v: error %v, want one saying %q", tc.opt, err, tc.want)
		}
	}
}

func TestMatchRefusesFlatCovarianceIn3D(t *testing.T) {
	var cov transform.Mat
	cov[0][0], cov[1][1] = 1, 1
	opt, _ := Options{}.withDefaults(1, 1)
	_, err := matchMapped([]register.Mapped{{Cov: cov}}, []transform.Vec{{}}, opt)
	if err == nil || !strings.Contains(err.Error(), "Options.Dim = 2") {
		t.Errorf("error %v, want one asking for Dim 2", err)
	}
}

// TestMatchIgnoresRowOrder: with ids given, shuffling the cells and the
// candidates changes nothing but the order of the results, and neither does
// the number of cores.
func TestMatchIgnoresRowOrder(t *testing.T) {
	sc, err := simulate.Generate(simulate.SmallParams(), 5)
	if err != nil {
		t.Fatal(err)
	}
	_, res := exactMapRun(t, sc)
	checkInvariants(t, res, len(sc.Candidates))

	rng := rand.New(rand.NewPCG(9, 10))
	cellPerm, candPerm := rng.Perm(len(sc.Cells)), rng.Perm(len(sc.Candidates))
	shuffled := *sc
	shuffled.Cells = make([]simulate.Cell, len(sc.Cells))
	shuffled.Candidates = make([]simulate.Candidate, len(sc.Candidates))
	for i, p := range cellPerm {
		shuffled.Cells[i] = sc.Cells[p]
	}
	for j, p := range candPerm {
		shuffled.Candidates[j] = sc.Candidates[p]
	}
	_, again := exactMapRunWithIDs(t, &shuffled)
	// And on one core instead of all of them.
	procs := runtime.GOMAXPROCS(1)
	_, orig := exactMapRunWithIDs(t, sc)
	runtime.GOMAXPROCS(procs)
	for i, p := range cellPerm {
		a, b := again[i], orig[p]
		id := func(s *simulate.Scenario, j int) string {
			if j < 0 {
				return ""
			}
			return s.Candidates[j].ID
		}
		if a.Status != b.Status || id(&shuffled, a.Candidate) != id(sc, b.Candidate) || a.PMatch != b.PMatch ||
			id(&shuffled, a.RunnerUp) != id(sc, b.RunnerUp) || a.PNone != b.PNone {
			t.Errorf("cell %s: %+v shuffled, %+v in order", sc.Cells[p].ID, a, b)
		}
	}
}

// exactMapRunWithIDs is exactMapRun with the ids of cells and candidates.
func exactMapRunWithIDs(t testing.TB, sc *simulate.Scenario) (tally, []Result) {
	t.Helper()
	sd := sc.Params.CellSDUM
	radii := register.NewRadiusTable(3, 0.95)
	mapped := make([]register.Mapped, len(sc.Cells))
	opt := Options{CellIDs: make([]string, len(sc.Cells)), CandidateIDs: make([]string, len(sc.Candidates))}
	for i, c := range sc.Cells {
		j := sc.TrueJacobian(c.SourceUM)
		var d transform.Mat
		for k := range 3 {
			d[k][k] = sd[k] * sd[k]
		}
		cov := j.Mul(d).Mul(j.T())
		mapped[i] = register.Mapped{Pos: sc.TrueMap(c.SourceUM), Cov: cov, R95: radii.Radius(cov), Status: status.OK}
		opt.CellIDs[i] = c.ID
	}
	cands := make([]transform.Vec, len(sc.Candidates))
	for j, c := range sc.Candidates {
		cands[j] = c.TargetUM
		opt.CandidateIDs[j] = c.ID
	}
	opt, err := opt.withDefaults(len(mapped), len(cands))
	if err != nil {
		t.Fatal(err)
	}
	res, err := matchMapped(mapped, cands, opt)
	if err != nil {
		t.Fatal(err)
	}
	return score(sc, res), res
}
