package register

import (
	"math"
	"math/rand/v2"
	"testing"

	"ferry/landmarks"
	"ferry/simulate"
	"ferry/status"
	"ferry/transform"
)

// scenarioProblem turns a simulated scenario's landmark picks into a
// problem, leaving out the ones the simulator spoiled (as the check finds
// them: TestScenarioFlags).
func scenarioProblem(s *simulate.Scenario, keepWrong bool) *Problem {
	p := &Problem{Dim: 3}
	for _, l := range s.Landmarks {
		if l.Wrong && !keepWrong {
			continue
		}
		p.IDs = append(p.IDs, l.ID)
		p.Kinds = append(p.Kinds, landmarks.Kind(l.Kind))
		p.Source = append(p.Source, l.SourceUM)
		p.Target = append(p.Target, l.TargetUM)
	}
	return p
}

// mapperFor fits the problem as fit would and builds the mapper that map
// would read back from the transform file.
func mapperFor(t testing.TB, p *Problem, s Settings) (*Mapper, *Assessment) {
	t.Helper()
	a, err := Assess(p, s)
	if err != nil {
		t.Fatal(err)
	}
	f := &Registration{Transform: a.Result.Transform, Landmarks: LandmarkSource{Path: "x", SHA256: "0"}, Uncertainty: NewUncertaintyModel(p, a, s)}
	m, err := NewMapper(f)
	if err != nil {
		t.Fatal(err)
	}
	return m, a
}

// Over many simulated scenarios with known truth (simulate), the
// 95 % radius of map holds the true position of 90 to 99 % of the cells
// that lie inside the landmarks' hull, and the radii are not wider than
// they need be: scaled down by a fifth they would hold clearly fewer.
func TestCoverageOverScenarios(t *testing.T) {
	inside, shrunk, total := 0, 0, 0
	seeds := []uint64{1, 2, 3, 4, 5, 6}
	if testing.Short() {
		seeds = seeds[:2]
	}
	for _, seed := range seeds {
		s, err := simulate.Generate(simulate.DefaultParams(), seed)
		if err != nil {
			t.Fatal(err)
		}
		m, _ := mapperFor(t, scenarioProblem(s, false), Settings{Smoothing: Smoothing{Auto: true}})
		sd := s.Params.CellSDUM
		for _, c := range s.Cells {
			got := m.Map(c.SourceUM, &sd)
			if got.Status != status.OK {
				continue
			}
			e := got.Pos.Sub(c.TrueTargetUM).Norm()
			total++
			if e <= got.R95 {
				inside++
			}
			if e <= 0.8*got.R95 {
				shrunk++
			}
		}
	}
	share := float64(inside) / float64(total)
	t.Logf("r95 holds %d of %d cells (%.1f %%); 0.8·r95 would hold %.1f %%", inside, total, 100*share, 100*float64(shrunk)/float64(total))
	if share < 0.90 || share > 0.99 {
		t.Errorf("coverage of r95 is %.3f over %d cells, want 0.90 to 0.99", share, total)
	}
	if s := float64(shrunk) / float64(total); s > 0.93 {
		t.Errorf("0.8·r95 still holds %.3f of the cells: the radii are wider than needed", s)
	}
}

// The simulator's spoiled landmarks are found in its scenarios, and few
// good ones are flagged.
func TestScenarioFlags(t *testing.T) {
	missed, false_ := 0, 0
	for _, seed := range []uint64{1, 2, 3, 4} {
		s, err := simulate.Generate(simulate.DefaultParams(), seed)
		if err != nil {
			t.Fatal(err)
		}
		a, err := Assess(scenarioProblem(s, true), Settings{Smoothing: Smoothing{Auto: true}})
		if err != nil {
			t.Fatal(err)
		}
		for i, l := range s.Landmarks {
			flagged := a.Landmarks[i].Flag != ""
			switch {
			case l.Wrong && !flagged:
				missed++
			case !l.Wrong && flagged:
				false_++
			}
		}
	}
	if missed > 0 || false_ > 1 {
		t.Errorf("over 4 scenarios: %d spoiled landmarks missed, %d good ones flagged", missed, false_)
	}
}

// The predicted target registration error of a rigid fit (Fitzpatrick, West
// & Maurer 1998, IEEE TMI 17(5):694–702) as map reports it, against a Monte
// Carlo run of the whole chain: fit, estimate the scale from the
// leave-one-out errors, map. Without --cell-sd map predicts where a new
// landmark picked as the others were would land, so its covariance is
// compared with the squared error of predicting such a landmark: TRE² plus
// the picking noise, 3σ².
func TestRigidTREMonteCarlo(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 4))
	var fiducials []transform.Vec
	for range 12 {
		fiducials = append(fiducials, transform.Vec{rng.Float64() * 300, rng.Float64() * 200, rng.Float64() * 100})
	}
	rot := randomRotation(rng, 3)
	truth := func(x transform.Vec) transform.Vec { return rot.MulVec(x).Add(transform.Vec{100, 50, 20}) }
	const sd = 1.5
	targets := []transform.Vec{{150, 100, 50}, {600, 100, 50}, {150, 100, 400}}
	sumSq := make([]float64, len(targets))
	sumPred := make([]float64, len(targets))
	const runs = 200
	for range runs {
		p := &Problem{Dim: 3}
		for i, f := range fiducials {
			y := truth(f)
			for k := range 3 {
				y[k] += rng.NormFloat64() * sd
			}
			p.IDs = append(p.IDs, string(rune('a'+i)))
			p.Kinds = append(p.Kinds, landmarks.KindVessel)
			p.Source = append(p.Source, f)
			p.Target = append(p.Target, y)
		}
		m, _ := mapperFor(t, p, Settings{Model: transform.Rigid})
		for k, x := range targets {
			got := m.Map(x, nil)
			e := got.Pos.Sub(truth(x))
			sumSq[k] += e.Dot(e) + 3*sd*sd
			sumPred[k] += got.Cov[0][0] + got.Cov[1][1] + got.Cov[2][2]
		}
	}
	for k := range targets {
		mc, pred := sumSq[k]/runs, sumPred[k]/runs
		// The scale is estimated from 12 landmarks each run, so the
		// average prediction is compared, within Monte Carlo error.
		if math.Abs(pred-mc) > 0.2*mc {
			t.Errorf("target %v: predicted TRE² %.3f µm², Monte Carlo %.3f µm²", targets[k], pred, mc)
		}
	}
}
