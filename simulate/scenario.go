package simulate

import (
	"cmp"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"ferry/transform"
)

// Box is an axis-aligned box, Min ≤ Max on every axis, in micrometres.
type Box struct {
	Min transform.Vec `json:"min"`
	Max transform.Vec `json:"max"`
}

// Contains reports whether p lies in the box, faces included.
func (b Box) Contains(p transform.Vec) bool {
	for i := range 3 {
		if p[i] < b.Min[i] || p[i] > b.Max[i] {
			return false
		}
	}
	return true
}

// shrink moves every face inwards by d.
func (b Box) shrink(d float64) Box {
	return Box{Min: b.Min.Add(iso(d)), Max: b.Max.Sub(iso(d))}
}

// Soma is a neuron of the tissue block.
type Soma struct {
	// PositionUM is the true centre in source space.
	PositionUM transform.Vec
	// TargetUM is TrueMap(PositionUM).
	TargetUM transform.Vec
	// Candidate is the id of its EM nucleus, empty when the soma lies
	// outside the EM block.
	Candidate string
	// Cell is the index in Scenario.Cells when the soma was imaged, else −1.
	Cell int
}

// Cell is an imaged, functionally characterised cell.
type Cell struct {
	ID string
	// SourceUM is the position written to the cells file: the true centre
	// plus in vivo localisation noise.
	SourceUM transform.Vec
	// TrueSourceUM and TrueTargetUM are its true positions.
	TrueSourceUM, TrueTargetUM transform.Vec
	// InsideEM reports that TrueTargetUM lies in the EM block; then
	// TrueCandidate is the id of its nucleus, else empty.
	InsideEM      bool
	TrueCandidate string
	Soma          int
	// Plane is the index of the imaging plane it was recorded in.
	Plane              int
	PrefOrientationDeg float64
	OSI                float64
}

// CandidateKind says what cell an EM nucleus belongs to.
type CandidateKind string

// The kinds of EM nuclei.
const (
	Neuron      CandidateKind = "neuron"
	Glia        CandidateKind = "glia"
	Endothelial CandidateKind = "endothelial"
)

// Candidate is an EM nucleus centroid.
type Candidate struct {
	ID string
	// TargetUM is the position written to the candidates file (in
	// micrometres; the file holds voxels when a target voxel size is set).
	TargetUM transform.Vec
	// SourceUM is the true source position of the nucleus (for a neuron,
	// the soma centre).
	SourceUM         transform.Vec
	Kind             CandidateKind
	NucleusVolumeUM3 float64
	// Soma is the index in Scenario.Somata of a neuron, else −1.
	Soma int
}

// Landmark is one landmark pair as written, with its truth.
type Landmark struct {
	ID   string
	Kind string // "vessel" or "soma"
	// SourceUM and TargetUM are the picked positions (noise included,
	// and for a wrong pair the wrong target).
	SourceUM, TargetUM transform.Vec
	// TrueSourceUM is the feature's true source position and TrueTargetUM
	// its true target, TrueMap(TrueSourceUM).
	TrueSourceUM, TrueTargetUM transform.Vec
	Wrong                      bool
	// Reason says how a wrong pair is wrong; empty when it is right.
	Reason string
	Note   string
}

// Scenario is a generated tissue block with its in vivo and EM views and
// the truth that links them.
type Scenario struct {
	Params Params
	Seed   uint64
	// Map is the true source→target map.
	Map TrueMapModel
	// EMBlock is the box of target space (µm) that the EM dataset covers.
	EMBlock      Box
	Vessels      []Segment
	BranchPoints []BranchPoint
	Somata       []Soma
	Cells        []Cell
	Candidates   []Candidate
	Landmarks    []Landmark
}

// TrueMap maps a source position (µm) to its true target position (µm).
func (s *Scenario) TrueMap(p transform.Vec) transform.Vec { return s.Map.Apply(p) }

// TrueJacobian is the derivative of TrueMap at p.
func (s *Scenario) TrueJacobian(p transform.Vec) transform.Mat { return s.Map.Jacobian(p) }

// TrueInverse is the source position whose true target is q, by Newton's
// iteration.
func (s *Scenario) TrueInverse(q transform.Vec) (transform.Vec, error) { return s.Map.Invert(q) }

// WrongLandmarks lists the ids of the wrong landmark pairs.
func (s *Scenario) WrongLandmarks() []string {
	var ids []string
	for _, l := range s.Landmarks {
		if l.Wrong {
			ids = append(ids, l.ID)
		}
	}
	return ids
}

// Each stage draws from its own stream, so that changing one knob (say the
// number of wrong landmarks) leaves everything drawn before it alone.
const (
	streamMap uint64 = iota + 0x5eed0001
	streamVessels
	streamSomata
	streamCells
	streamCandidates
	streamNonNeuronal
	streamLandmarks
	streamWrong
)

func stream(seed, which uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, which)) }

// Generate builds the scenario of p drawn from seed. The same p and seed
// give the same scenario, bit for bit.
func Generate(p Params, seed uint64) (*Scenario, error) {
	if err := p.Validate(); err != nil {
		return nil, err
	}
	p.ImagingPlanesUM = slices.Clone(p.ImagingPlanesUM)
	s := &Scenario{Params: p, Seed: seed}
	s.Map = newTrueMap(p, stream(seed, streamMap))
	// A tree too poor in branch points for the vessel landmarks asked for
	// is drawn again from the same stream: the EM block will hold only part
	// of the field, and users leave some branch points alone.
	rng := stream(seed, streamVessels)
	inner := Box{Max: p.FieldUM}.shrink(landmarkMargin)
	for attempt := 0; ; attempt++ {
		s.Vessels, s.BranchPoints = growVessels(p, rng)
		usable := 0
		for _, b := range s.BranchPoints {
			if inner.Contains(b.PositionUM) {
				usable++
			}
		}
		if usable >= 2*p.VesselLandmarks || attempt == 20 {
			break
		}
	}

	field := Box{Max: p.FieldUM}
	cellSide := p.SomaMinSpacingUM
	nuclei := newPointGrid(field.Min, field.Max, cellSide)
	walls := newSegmentGrid(field.Min, field.Max, 20, s.Vessels, p.SomaRadiusUM)
	if err := s.placeSomata(nuclei, walls); err != nil {
		return nil, err
	}
	if err := s.pickCells(); err != nil {
		return nil, err
	}
	s.cutEMBlock()
	if err := s.makeCandidates(nuclei, walls); err != nil {
		return nil, err
	}
	if err := s.pickLandmarks(); err != nil {
		return nil, err
	}
	if err := s.spoilLandmarks(); err != nil {
		return nil, err
	}
	return s, nil
}

// placeSomata throws darts layer by layer: a dart is kept unless it lies
// within the minimum spacing of a soma already placed or within the soma
// radius of a vessel wall (random sequential addition).
func (s *Scenario) placeSomata(nuclei *pointGrid, walls *segmentGrid) error {
	p := s.Params
	rng := stream(s.Seed, streamSomata)
	area := p.FieldUM[0] * p.FieldUM[1]
	layers := []struct {
		top, bottom, density float64
	}{
		{0, p.Layer1DepthUM, p.SomaDensityPerMM3 * p.Layer1DensityFactor},
		{p.Layer1DepthUM, p.FieldUM[2], p.SomaDensityPerMM3},
	}
	for _, layer := range layers {
		want := int(math.Round(layer.density * 1e-9 * area * (layer.bottom - layer.top)))
		placed := 0
		for attempts := 0; placed < want; attempts++ {
			if attempts > 200*want+1000 {
				return fmt.Errorf("placed only %d of %d somata between depths %v and %v µm: the density %v per mm³ does not fit with a minimum spacing of %v µm around the vessels", placed, want, layer.top, layer.bottom, layer.density, p.SomaMinSpacingUM)
			}
			q := transform.Vec{rng.Float64() * p.FieldUM[0], rng.Float64() * p.FieldUM[1], layer.top + rng.Float64()*(layer.bottom-layer.top)}
			if nuclei.near(q, p.SomaMinSpacingUM) || walls.blocked(q, p.SomaRadiusUM) {
				continue
			}
			nuclei.add(q)
			s.Somata = append(s.Somata, Soma{PositionUM: q, TargetUM: s.TrueMap(q), Cell: -1})
			placed++
		}
	}
	return nil
}

// pickCells draws the imaged cells among the somata near an imaging plane
// and gives them a measured position and functional measures.
func (s *Scenario) pickCells() error {
	p := s.Params
	if p.ImagedCells == 0 {
		return nil
	}
	rng := stream(s.Seed, streamCells)
	type eligible struct{ soma, plane int }
	var pool []eligible
	for i, so := range s.Somata {
		best, bestD := -1, math.Inf(1)
		for k, z := range p.ImagingPlanesUM {
			if d := math.Abs(so.PositionUM[2] - z); d <= p.PlaneHalfThicknessUM && d < bestD {
				best, bestD = k, d
			}
		}
		if best >= 0 {
			pool = append(pool, eligible{i, best})
		}
	}
	if len(pool) < p.ImagedCells {
		return fmt.Errorf("%d imaged cells asked for but only %d somata lie within %v µm of the imaging planes", p.ImagedCells, len(pool), p.PlaneHalfThicknessUM)
	}
	// A partial Fisher–Yates shuffle draws without replacement.
	for i := range p.ImagedCells {
		j := i + rng.IntN(len(pool)-i)
		pool[i], pool[j] = pool[j], pool[i]
	}
	chosen := pool[:p.ImagedCells]
	cells := make([]Cell, len(chosen))
	for i, e := range chosen {
		so := s.Somata[e.soma]
		cells[i] = Cell{
			SourceUM:           so.PositionUM.Add(gauss3(rng, p.CellSDUM)),
			TrueSourceUM:       so.PositionUM,
			TrueTargetUM:       so.TargetUM,
			Soma:               e.soma,
			Plane:              e.plane,
			PrefOrientationDeg: 180 * rng.Float64(),
			// A logit-normal selectivity: most cells broadly tuned, a
			// few sharply.
			OSI: 1 / (1 + math.Exp(-(-0.6 + 0.9*rng.NormFloat64()))),
		}
	}
	// Ids follow the order a segmentation of the planes lists them in:
	// plane by plane, row by row.
	slices.SortStableFunc(cells, func(a, b Cell) int {
		return cmp.Or(cmp.Compare(a.Plane, b.Plane), cmp.Compare(a.SourceUM[1], b.SourceUM[1]), cmp.Compare(a.SourceUM[0], b.SourceUM[0]))
	})
	width := digits(len(cells))
	for i := range cells {
		cells[i].ID = fmt.Sprintf("c%0*d", width, i+1)
		s.Somata[cells[i].Soma].Cell = i
	}
	s.Cells = cells
	return nil
}

// cutEMBlock sets the EM block: the box around the mapped field, with a
// strip cut off its high-x and its low-y side so that the share
// EMCoverage of the imaged cells keeps its true target inside.
func (s *Scenario) cutEMBlock() {
	p := s.Params
	lo := transform.Vec{math.Inf(1), math.Inf(1), math.Inf(1)}
	hi := lo.Scale(-1)
	const n = 10
	for i := range n + 1 {
		for j := range n + 1 {
			for k := range n + 1 {
				q := s.TrueMap(transform.Vec{p.FieldUM[0] * float64(i) / n, p.FieldUM[1] * float64(j) / n, p.FieldUM[2] * float64(k) / n})
				for a := range 3 {
					lo[a] = math.Min(lo[a], q[a])
					hi[a] = math.Max(hi[a], q[a])
				}
			}
		}
	}
	// A little margin: the grid above can miss the warp's extremes.
	bound := Box{Min: lo.Sub(iso(2)), Max: hi.Add(iso(2))}
	size := bound.Max.Sub(bound.Min)
	cut := func(t float64) Box {
		b := bound
		b.Max[0] -= t * p.EMCutShareX * size[0]
		b.Min[1] += t * (1 - p.EMCutShareX) * size[1]
		return b
	}
	share := func(b Box) float64 {
		if len(s.Cells) == 0 {
			return 1
		}
		in := 0
		for _, c := range s.Cells {
			if b.Contains(c.TrueTargetUM) {
				in++
			}
		}
		return float64(in) / float64(len(s.Cells))
	}
	// The share falls as the cut deepens. Bisect for the depth where it
	// crosses the coverage asked for, take the attainable share nearest to
	// it, then place the cut midway along the range of depths that give
	// exactly that share, so that no cell sits on a face of the block.
	bisect := func(keep func(float64) bool) (float64, float64) {
		lo, hi := 0.0, 1.0 // keep(lo) holds, keep(hi) does not
		for range 60 {
			if mid := 0.5 * (lo + hi); keep(mid) {
				lo = mid
			} else {
				hi = mid
			}
		}
		return lo, hi
	}
	shareAt := func(t float64) float64 { return share(cut(t)) }
	t0, t1 := bisect(func(t float64) bool { return shareAt(t) >= p.EMCoverage })
	level := shareAt(t0)
	if other := shareAt(t1); math.Abs(other-p.EMCoverage) < math.Abs(level-p.EMCoverage) {
		level = other
	}
	t := 0.0
	if level < 1 {
		_, first := bisect(func(t float64) bool { return shareAt(t) > level })
		last := 1.0
		if shareAt(1) < level {
			last, _ = bisect(func(t float64) bool { return shareAt(t) >= level })
		}
		t = 0.5 * (first + last)
	}
	// Round the faces to 0.1 µm, as a block's extent would be recorded.
	b := cut(t)
	for a := range 3 {
		b.Min[a] = math.Floor(b.Min[a]*10) / 10
		b.Max[a] = math.Ceil(b.Max[a]*10) / 10
	}
	s.EMBlock = b
}

// makeCandidates turns every soma inside the EM block into a nucleus
// centroid, adds the non-neuronal nuclei and numbers them all in the order
// of EM sections.
func (s *Scenario) makeCandidates(nuclei *pointGrid, walls *segmentGrid) error {
	p := s.Params
	rng := stream(s.Seed, streamCandidates)
	var cands []Candidate
	for i, so := range s.Somata {
		if !s.EMBlock.Contains(so.TargetUM) {
			continue
		}
		offset := gauss3(rng, iso(p.NucleusOffsetSDUM)).Add(gauss3(rng, iso(p.EMPickSDUM)))
		cands = append(cands, Candidate{
			TargetUM: so.TargetUM.Add(offset),
			SourceUM: so.PositionUM,
			Kind:     Neuron,
			// Nuclear volumes recalled from memory, roughly: neurons
			// a few hundred µm³, glia and endothelial cells smaller.
			NucleusVolumeUM3: 380 * math.Exp(0.2*rng.NormFloat64()),
			Soma:             i,
		})
	}

	rng = stream(s.Seed, streamNonNeuronal)
	others := int(math.Round(p.NonNeuronalShare * float64(len(cands))))
	endothelial := int(math.Round(p.EndothelialShare * float64(others)))
	if len(s.Vessels) == 0 {
		endothelial = 0
	}
	cum := segmentLengths(s.Vessels)
	field := Box{Max: p.FieldUM}
	wallClearance := 3.0 // a glial nucleus' radius, roughly
	for k, attempts := 0, 0; k < others; attempts++ {
		if attempts > 200*others+1000 {
			return fmt.Errorf("placed only %d of %d non-neuronal nuclei at least %v µm from any other nucleus", k, others, p.GliaMinSpacingUM)
		}
		var q transform.Vec
		kind := Glia
		if k < endothelial {
			// On a vessel wall, at a point drawn uniformly along the tree.
			kind = Endothelial
			at := rng.Float64() * cum[len(cum)-1]
			si, _ := slices.BinarySearch(cum, at)
			si = min(si, len(cum)-1)
			seg := s.Vessels[si]
			axis := seg.End.Sub(seg.Start)
			centre := seg.Start.Add(axis.Scale(rng.Float64()))
			q = centre.Add(turn(normalise(axis), math.Pi/2, rng).Scale(seg.RadiusUM + 1))
		} else {
			q = transform.Vec{rng.Float64() * p.FieldUM[0], rng.Float64() * p.FieldUM[1], rng.Float64() * p.FieldUM[2]}
			if walls.blocked(q, wallClearance) {
				continue
			}
		}
		target := s.TrueMap(q)
		if !field.Contains(q) || !s.EMBlock.Contains(target) || nuclei.near(q, p.GliaMinSpacingUM) {
			continue
		}
		nuclei.add(q)
		volume := 150 * math.Exp(0.3*rng.NormFloat64())
		if kind == Endothelial {
			volume = 120 * math.Exp(0.3*rng.NormFloat64())
		}
		cands = append(cands, Candidate{
			TargetUM:         target.Add(gauss3(rng, iso(p.EMPickSDUM))),
			SourceUM:         q,
			Kind:             kind,
			NucleusVolumeUM3: volume,
			Soma:             -1,
		})
		k++
	}

	// Number them as a segmentation of the EM volume would, section by
	// section, so that an id says nothing of the kind.
	// Sort a permutation rather than the records, with the drawing order as
	// the last key so that the order is total.
	order := make([]int, len(cands))
	for i := range order {
		order[i] = i
	}
	slices.SortFunc(order, func(i, j int) int {
		a, b := cands[i].TargetUM, cands[j].TargetUM
		return cmp.Or(cmp.Compare(a[2], b[2]), cmp.Compare(a[1], b[1]), cmp.Compare(a[0], b[0]), cmp.Compare(i, j))
	})
	sorted := make([]Candidate, len(cands))
	for k, i := range order {
		sorted[k] = cands[i]
	}
	cands = sorted
	width := max(6, digits(len(cands)))
	for i := range cands {
		cands[i].ID = fmt.Sprintf("n%0*d", width, i+1)
		if so := cands[i].Soma; so >= 0 {
			s.Somata[so].Candidate = cands[i].ID
		}
	}
	s.Candidates = cands
	for i := range s.Cells {
		c := &s.Cells[i]
		c.TrueCandidate = s.Somata[c.Soma].Candidate
		c.InsideEM = c.TrueCandidate != ""
	}
	return nil
}
