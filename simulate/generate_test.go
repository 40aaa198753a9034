package simulate

import (
	"bytes"
	"cmp"
	"math"
	"runtime"
	"slices"
	"strings"
	"testing"

	"ferry/transform"
)

func mustGenerate(t testing.TB, p Params, seed uint64) *Scenario {
	t.Helper()
	s, err := Generate(p, seed)
	if err != nil {
		t.Fatalf("Generate(seed %d): %v", seed, err)
	}
	return s
}

func encode(t testing.TB, s *Scenario) map[string][]byte {
	t.Helper()
	files, err := s.Encode()
	if err != nil {
		t.Fatal(err)
	}
	return files
}

func TestDeterminism(t *testing.T) {
	for name, p := range map[string]Params{"default": DefaultParams(), "small": SmallParams()} {
		t.Run(name, func(t *testing.T) {
			procs := runtime.GOMAXPROCS(1)
			one := encode(t, mustGenerate(t, p, 42))
			runtime.GOMAXPROCS(max(4, procs))
			again := encode(t, mustGenerate(t, p, 42))
			runtime.GOMAXPROCS(procs)
			if len(one) != 6 {
				t.Fatalf("%d files, want 6", len(one))
			}
			for file, data := range one {
				if !bytes.Equal(data, again[file]) {
					t.Errorf("%s differs between two runs with seed 42", file)
				}
			}
			other := encode(t, mustGenerate(t, p, 43))
			for file, data := range one {
				if bytes.Equal(data, other[file]) {
					t.Errorf("%s is the same for seeds 42 and 43", file)
				}
			}
		})
	}
}

func TestStagesDrawIndependently(t *testing.T) {
	// Changing the number of wrong landmarks leaves everything else alone.
	p := SmallParams()
	a := encode(t, mustGenerate(t, p, 9))
	p.WrongLandmarks = 0
	b := encode(t, mustGenerate(t, p, 9))
	for _, file := range []string{CellsFile, CandidatesFile, TruthCellsFile} {
		if !bytes.Equal(a[file], b[file]) {
			t.Errorf("%s changed with the number of wrong landmarks", file)
		}
	}
}

func TestSomaDensityAndSpacing(t *testing.T) {
	p := DefaultParams()
	s := mustGenerate(t, p, 1)
	count := func(b Box) int {
		n := 0
		for _, so := range s.Somata {
			if b.Contains(so.PositionUM) {
				n++
			}
		}
		return n
	}
	tests := []struct {
		name    string
		box     Box
		density float64
		tol     float64
	}{
		{"below layer 1", Box{transform.Vec{0, 0, p.Layer1DepthUM}, p.FieldUM}, p.SomaDensityPerMM3, 0.01},
		{"central block", Box{transform.Vec{150, 150, 150}, transform.Vec{450, 450, 350}}, p.SomaDensityPerMM3, 0.06},
		{"layer 1", Box{transform.Vec{}, transform.Vec{p.FieldUM[0], p.FieldUM[1], p.Layer1DepthUM}}, p.SomaDensityPerMM3 * p.Layer1DensityFactor, 0.05},
	}
	for _, tt := range tests {
		size := tt.box.Max.Sub(tt.box.Min)
		want := tt.density * size[0] * size[1] * size[2] * 1e-9
		got := float64(count(tt.box))
		if math.Abs(got-want) > tt.tol*want {
			t.Errorf("%s: %v somata, want %.0f ± %.0f%% (%v per mm³)", tt.name, got, want, 100*tt.tol, tt.density)
		}
	}

	// Every pair of somata lies at least the minimum spacing apart.
	var somata []transform.Vec
	for _, so := range s.Somata {
		somata = append(somata, so.PositionUM)
	}
	if i, j, ok := closePair(somata, somata, p.SomaMinSpacingUM); ok {
		t.Errorf("somata %d and %d lie %.2f µm apart, under the %v µm minimum", i, j, somata[i].Sub(somata[j]).Norm(), p.SomaMinSpacingUM)
	}
	// No soma overlaps a vessel.
	for i, so := range s.Somata {
		for _, v := range s.Vessels {
			if d := distanceToSegment(so.PositionUM, v.Start, v.End); d < v.RadiusUM+p.SomaRadiusUM {
				t.Fatalf("soma %d lies %.2f µm from the axis of a vessel of radius %.2f µm", i, d, v.RadiusUM)
			}
		}
	}
	// Non-neuronal nuclei keep their own spacing to every other nucleus.
	var glia, all []transform.Vec
	for _, c := range s.Candidates {
		if c.Kind != Neuron {
			glia = append(glia, c.SourceUM)
		}
		all = append(all, c.SourceUM)
	}
	if i, j, ok := closePair(glia, all, p.GliaMinSpacingUM); ok {
		t.Errorf("a non-neuronal nucleus at %v µm lies %.2f µm from another nucleus", glia[i], glia[i].Sub(all[j]).Norm())
	}
}

// closePair finds a ∈ as and b ∈ bs, not the same point, closer than d,
// by a sweep along x: independent of the generator's grid.
func closePair(as, bs []transform.Vec, d float64) (int, int, bool) {
	order := make([]int, len(bs))
	for i := range order {
		order[i] = i
	}
	slices.SortFunc(order, func(i, j int) int { return cmp.Compare(bs[i][0], bs[j][0]) })
	xs := make([]float64, len(order))
	for k, i := range order {
		xs[k] = bs[i][0]
	}
	for i, a := range as {
		k, _ := slices.BinarySearch(xs, a[0]-d)
		for ; k < len(xs) && xs[k] < a[0]+d; k++ {
			b := bs[order[k]]
			if b != a && a.Sub(b).Norm() < d {
				return i, order[k], true
			}
		}
	}
	return 0, 0, false
}

func TestDistanceToSegment(t *testing.T) {
	a, b := transform.Vec{0, 0, 0}, transform.Vec{10, 0, 0}
	for _, tt := range []struct {
		p    transform.Vec
		want float64
	}{
		{transform.Vec{5, 3, 4}, 5},
		{transform.Vec{-3, 4, 0}, 5},
		{transform.Vec{13, 0, 4}, 5},
		{transform.Vec{10, 0, 0}, 0},
	} {
		if got := distanceToSegment(tt.p, a, b); math.Abs(got-tt.want) > 1e-12 {
			t.Errorf("distance from %v to the segment: %v, want %v", tt.p, got, tt.want)
		}
	}
	if got := distanceToSegment(transform.Vec{3, 4, 0}, a, a); math.Abs(got-5) > 1e-12 {
		t.Errorf("distance to a point segment: %v, want 5", got)
	}
}

func TestVesselTree(t *testing.T) {
	p := DefaultParams()
	s := mustGenerate(t, p, 2)
	field := Box{Max: p.FieldUM}
	roots := map[int]bool{}
	for i, v := range s.Vessels {
		if !field.Contains(v.Start) || !field.Contains(v.End) {
			t.Fatalf("segment %d leaves the field: %v – %v", i, v.Start, v.End)
		}
		if v.RadiusUM < p.CapillaryRadiusUM || v.RadiusUM > p.VesselRootRadiusUM[1] {
			t.Fatalf("segment %d has radius %.2f µm", i, v.RadiusUM)
		}
		if l := v.End.Sub(v.Start).Norm(); l < p.SegmentLengthUM[0]-1e-9 || l > p.SegmentLengthUM[1]+1e-9 {
			t.Fatalf("segment %d is %.2f µm long", i, l)
		}
		if v.Start[2] == 0 && v.Order == 0 {
			roots[v.Vessel] = true
		}
	}
	if len(roots) != p.Vessels {
		t.Errorf("%d vessels start at the pia, want %d", len(roots), p.Vessels)
	}
	if len(s.BranchPoints) < p.VesselLandmarks*3 {
		t.Errorf("only %d branch points for %d vessel landmarks", len(s.BranchPoints), p.VesselLandmarks)
	}
	// Each branch point starts a side branch one order up.
	for i, b := range s.BranchPoints {
		found := false
		for _, v := range s.Vessels {
			if v.Start == b.PositionUM && v.Order == b.Order+1 && v.Vessel == b.Vessel {
				found = true
				break
			}
		}
		if !found {
			t.Errorf("branch point %d at %v µm starts no side branch", i, b.PositionUM)
		}
	}
}

func TestEMCoverage(t *testing.T) {
	tests := []struct {
		coverage float64
		seed     uint64
	}{
		{0.83, 1}, {0.83, 2}, {0.83, 3}, {0.83, 4}, {0.5, 1}, {0.95, 2}, {1, 3},
	}
	for _, tt := range tests {
		p := DefaultParams()
		p.EMCoverage = tt.coverage
		s := mustGenerate(t, p, tt.seed)
		outside := 0
		for _, c := range s.Cells {
			if s.EMBlock.Contains(c.TrueTargetUM) != c.InsideEM {
				t.Fatalf("coverage %v seed %d: cell %s inside_em %v disagrees with the block", tt.coverage, tt.seed, c.ID, c.InsideEM)
			}
			if !c.InsideEM {
				outside++
				if c.TrueCandidate != "" {
					t.Errorf("coverage %v seed %d: cell %s lies outside the EM block but has candidate %s", tt.coverage, tt.seed, c.ID, c.TrueCandidate)
				}
			}
		}
		share := float64(outside) / float64(len(s.Cells))
		if want := 1 - p.EMCoverage; math.Abs(share-want) > 0.02 {
			t.Errorf("coverage %v seed %d: %.3f of the imaged cells lie outside the EM block, want %.3f", tt.coverage, tt.seed, share, want)
		}
		if tt.coverage == 1 {
			// Nothing to cut: the block holds the whole field.
			for i, so := range s.Somata {
				if so.Candidate == "" {
					t.Fatalf("full coverage, yet soma %d at %v µm lies outside the EM block", i, so.PositionUM)
				}
			}
		}
	}
}

func TestCandidates(t *testing.T) {
	p := DefaultParams()
	s := mustGenerate(t, p, 5)
	byID := map[string]Candidate{}
	neurons, others := 0, 0
	for _, c := range s.Candidates {
		if _, dup := byID[c.ID]; dup {
			t.Fatalf("candidate id %s twice", c.ID)
		}
		if len(c.ID) != 7 || c.ID[0] != 'n' {
			t.Fatalf("candidate id %q: want n and six digits", c.ID)
		}
		byID[c.ID] = c
		if c.Kind == Neuron {
			neurons++
			so := s.Somata[c.Soma]
			if so.Candidate != c.ID || !s.EMBlock.Contains(so.TargetUM) {
				t.Fatalf("candidate %s and its soma disagree", c.ID)
			}
			// Nucleus offset and picking noise: 1 and 0.3 µm per axis.
			if d := c.TargetUM.Sub(so.TargetUM).Norm(); d > 6 {
				t.Errorf("nucleus %s lies %.2f µm from its soma's true target", c.ID, d)
			}
		} else {
			others++
			if !s.EMBlock.Contains(s.TrueMap(c.SourceUM)) {
				t.Errorf("non-neuronal nucleus %s lies outside the EM block", c.ID)
			}
		}
		if !(c.NucleusVolumeUM3 > 0) {
			t.Errorf("candidate %s has volume %v µm³", c.ID, c.NucleusVolumeUM3)
		}
	}
	inside := 0
	for _, so := range s.Somata {
		if s.EMBlock.Contains(so.TargetUM) {
			inside++
		}
	}
	if neurons != inside {
		t.Errorf("%d neuronal candidates for %d somata inside the EM block", neurons, inside)
	}
	if want := p.NonNeuronalShare * float64(neurons); math.Abs(float64(others)-want) > 1 {
		t.Errorf("%d non-neuronal candidates, want %.0f", others, want)
	}
	for _, c := range s.Cells {
		if c.InsideEM {
			if byID[c.TrueCandidate].Soma != c.Soma {
				t.Errorf("cell %s: true candidate %s is not its own nucleus", c.ID, c.TrueCandidate)
			}
		}
	}
}

func TestCells(t *testing.T) {
	p := DefaultParams()
	s := mustGenerate(t, p, 6)
	if len(s.Cells) != p.ImagedCells {
		t.Fatalf("%d cells, want %d", len(s.Cells), p.ImagedCells)
	}
	var sq transform.Vec
	seen := map[int]bool{}
	for _, c := range s.Cells {
		if seen[c.Soma] {
			t.Fatalf("soma %d imaged twice", c.Soma)
		}
		seen[c.Soma] = true
		if d := math.Abs(c.TrueSourceUM[2] - p.ImagingPlanesUM[c.Plane]); d > p.PlaneHalfThicknessUM {
			t.Errorf("cell %s lies %.1f µm from its plane", c.ID, d)
		}
		if c.TrueTargetUM != s.TrueMap(c.TrueSourceUM) {
			t.Errorf("cell %s: true target is not TrueMap of its true source", c.ID)
		}
		if c.OSI < 0 || c.OSI > 1 || c.PrefOrientationDeg < 0 || c.PrefOrientationDeg >= 180 {
			t.Errorf("cell %s: osi %v, preferred orientation %v°", c.ID, c.OSI, c.PrefOrientationDeg)
		}
		d := c.SourceUM.Sub(c.TrueSourceUM)
		for i := range 3 {
			sq[i] += d[i] * d[i]
		}
	}
	// The measured positions scatter by the localisation sd per axis.
	for i := range 3 {
		sd := math.Sqrt(sq[i] / float64(len(s.Cells)))
		if math.Abs(sd-p.CellSDUM[i]) > 0.15*p.CellSDUM[i] {
			t.Errorf("localisation noise along axis %d: sd %.3f µm, want %.3f", i, sd, p.CellSDUM[i])
		}
	}
}

func TestLandmarks(t *testing.T) {
	for _, wrong := range []int{0, 1, 2, 3, 5} {
		p := DefaultParams()
		p.WrongLandmarks = wrong
		s := mustGenerate(t, p, 8)
		if got := len(s.WrongLandmarks()); got != wrong {
			t.Errorf("%d wrong landmarks asked for, %d made", wrong, got)
		}
		kinds := map[string]int{}
		ids := map[string]bool{}
		var correspondences, slices int
		for _, l := range s.Landmarks {
			kinds[l.Kind]++
			if ids[l.ID] {
				t.Fatalf("landmark id %s twice", l.ID)
			}
			ids[l.ID] = true
			if prefix := map[string]string{"vessel": "v", "soma": "s"}[l.Kind]; !strings.HasPrefix(l.ID, prefix) {
				t.Errorf("landmark %s of kind %s", l.ID, l.Kind)
			}
			if !s.EMBlock.Contains(l.TrueTargetUM) {
				t.Errorf("landmark %s lies outside the EM block", l.ID)
			}
			if l.TrueTargetUM != s.TrueMap(l.TrueSourceUM) {
				t.Errorf("landmark %s: true target is not TrueMap of its true source", l.ID)
			}
			if d := l.SourceUM.Sub(l.TrueSourceUM).Norm(); d > 25 {
				t.Errorf("landmark %s source picked %.1f µm off", l.ID, d)
			}
			miss := l.TargetUM.Sub(l.TrueTargetUM)
			switch {
			case !l.Wrong:
				if l.Reason != "" || miss.Norm() > 6 {
					t.Errorf("right landmark %s: reason %q, target %.2f µm off", l.ID, l.Reason, miss.Norm())
				}
			case strings.HasPrefix(l.Reason, "wrong correspondence"):
				correspondences++
				if l.Kind != "vessel" || miss.Norm() < p.WrongMinDistanceUM*0.7 {
					t.Errorf("wrong correspondence %s (%s) only %.2f µm off", l.ID, l.Kind, miss.Norm())
				}
			case strings.HasPrefix(l.Reason, "wrong slice"):
				slices++
				if dz := math.Abs(miss[2]); dz < p.WrongSliceUM[0]-2 || dz > p.WrongSliceUM[1]+2 {
					t.Errorf("wrong slice %s off by %.2f µm in z", l.ID, miss[2])
				}
			default:
				t.Errorf("wrong landmark %s with reason %q", l.ID, l.Reason)
			}
		}
		if correspondences != (wrong+1)/2 || slices != wrong/2 {
			t.Errorf("%d wrong: %d correspondences and %d slices", wrong, correspondences, slices)
		}
		if kinds["vessel"] != p.VesselLandmarks || kinds["soma"] != p.SomaLandmarks {
			t.Errorf("landmark kinds %v, want %d vessel and %d soma", kinds, p.VesselLandmarks, p.SomaLandmarks)
		}
	}
}

func TestLandmarksAreSpreadButNotUniform(t *testing.T) {
	p := DefaultParams()
	var shallow, deep int
	for seed := uint64(10); seed < 15; seed++ {
		s := mustGenerate(t, p, seed)
		lo := transform.Vec{math.Inf(1), math.Inf(1), math.Inf(1)}
		hi := lo.Scale(-1)
		for i, a := range s.Landmarks {
			for _, b := range s.Landmarks[i+1:] {
				if d := a.TrueSourceUM.Sub(b.TrueSourceUM).Norm(); d < 1 {
					t.Errorf("seed %d: landmarks %s and %s coincide", seed, a.ID, b.ID)
				}
			}
			if a.TrueSourceUM[2] < p.FieldUM[2]/2 {
				shallow++
			} else {
				deep++
			}
			for k := range 3 {
				lo[k] = math.Min(lo[k], a.TrueSourceUM[k])
				hi[k] = math.Max(hi[k], a.TrueSourceUM[k])
			}
		}
		// Spread: the landmarks span most of the field on every axis.
		for k := range 3 {
			if hi[k]-lo[k] < 0.6*p.FieldUM[k] {
				t.Errorf("seed %d: landmarks span %.0f µm along axis %d of a %.0f µm field", seed, hi[k]-lo[k], k, p.FieldUM[k])
			}
		}
	}
	// Users pick more where the in vivo image is sharp, but not only there.
	if deep == 0 || float64(shallow) < 1.2*float64(deep) {
		t.Errorf("%d landmarks in the upper half of the field, %d in the lower: want clearly more above, some below", shallow, deep)
	}
}

func TestGenerateReportsImpossibleScenes(t *testing.T) {
	tests := []struct {
		name   string
		modify func(*Params)
		want   string
	}{
		{"too many imaged cells", func(p *Params) { p.ImagedCells = 5000 }, "imaged cells"},
		{"too many vessel landmarks", func(p *Params) { p.VesselLandmarks = 400 }, "vessel landmarks"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			p := SmallParams()
			tt.modify(&p)
			_, err := Generate(p, 1)
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("Generate: error %v, want one about %s", err, tt.want)
			}
		})
	}
}

func TestPresetsGenerateForManySeeds(t *testing.T) {
	seeds := uint64(40)
	if testing.Short() {
		seeds = 5
	}
	for seed := range seeds {
		s := mustGenerate(t, SmallParams(), seed)
		if n := len(s.Candidates); n < 200 || n > 800 {
			t.Errorf("small scenario seed %d has %d candidates, want a few hundred", seed, n)
		}
	}
	for seed := range seeds / 4 {
		mustGenerate(t, DefaultParams(), seed)
	}
}
