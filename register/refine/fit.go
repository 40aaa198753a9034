package refine

import (
	"encoding/json"
	"fmt"
	"math"
	"sort"

	"ferry/register"
	"ferry/transform"
)

// fitState is the spline fitted to the landmarks and one round's pairs.
type fitState struct {
	// transform is the spline; smoothing its S for x and y, and for z.
	transform transform.Transform
	smoothing [2]float64
	// loo and looFactor are every node's leave-one-out error and its
	// factor, axis by axis.
	loo       []transform.Vec
	looFactor []transform.Vec
	// src, dst and weights are the nodes: landmarks, then pair nodes.
	src, dst []transform.Vec
	weights  []float64
	// nodes is the number of pair nodes.
	nodes       int
	scale       transform.Vec
	uncertainty *register.UncertaintyModel
	heldOut     []register.HeldOut
	// pairs are the round's pairs with their leave-one-out errors;
	// pairFactor the prediction factor of each one's cell without its pair.
	pairs      []Pair
	pairFactor []transform.Vec
}

// wideDecades is the grid of the smoothing search, in decades about the
// last choice, refined by a quarter decade about the best.
var wideDecades = []float64{-2, -1.5, -1, -0.5, 0, 0.5, 1}

// fit fits the thin-plate spline to the landmarks and the pairs (up to the
// node budget), its smoothing for x and y and for z chosen apart by the
// weighted mean squared exact leave-one-out error of every node along those
// axes (ordinary cross-validation; Wahba 1990, "Spline Models for
// Observational Data", ch. 4), searched about hint when wide, else hint.
func (r *refiner) fit(pairs []Pair, hint [2]float64, wide bool) (*fitState, error) {
	p := r.in.Landmarks
	sortPairs(pairs)
	isNode := r.chooseNodes(pairs, r.opt.MaxNodes-p.Len())
	st := &fitState{}
	st.src = append([]transform.Vec(nil), p.Source...)
	st.dst = append([]transform.Vec(nil), p.Target...)
	st.weights = append([]float64(nil), r.a.Weights...)
	for i, pr := range pairs {
		if isNode[i] {
			pairs[i].Node = true
			st.src = append(st.src, pr.Source)
			st.dst = append(st.dst, pr.Target)
			st.weights = append(st.weights, r.pairWeight)
			st.nodes++
		}
	}
	if !(hint[0] > 0) {
		h := 1e-3 * typicalDistance(st.src, r.dim)
		hint = [2]float64{h, h}
	}
	// The landmarks the check flagged stay nodes, as fit keeps them, but
	// neither choose the smoothing nor set the scale: a wrong landmark's
	// error would make every radius wider.
	clean := make([]bool, len(st.src))
	for i := range clean {
		clean[i] = i >= p.Len() || r.a.Landmarks[i].Flag == ""
	}
	// Two groups of target axes, x and y together and z alone, each with
	// its own smoothing: in vivo z is several times noisier than x and y,
	// and one smoothing for all three would either follow the noise in z
	// or miss the warp in x and y.
	groups := [][]int{{0, 1}, {2}}
	if r.dim == 2 {
		groups = groups[:1]
	}
	type trial struct {
		sm   float64
		cost [2]float64
		res  *transform.Result
	}
	tried := map[float64]trial{}
	try := func(sm float64) trial {
		if t, ok := tried[sm]; ok {
			return t
		}
		t := trial{sm: sm, cost: [2]float64{math.Inf(1), math.Inf(1)}}
		res, err := transform.Fit(transform.TPS, r.dim, st.src, st.dst,
			transform.Options{Weights: st.weights, Smoothing: sm, LeaveOneOut: true})
		r.rep.Add(1)
		if err == nil {
			t.res, t.cost = res, [2]float64{}
			for i, e := range res.LOO {
				if clean[i] {
					for g, axes := range groups {
						for _, a := range axes {
							t.cost[g] += st.weights[i] * e[a] * e[a]
						}
					}
				}
			}
		}
		tried[sm] = t
		return t
	}
	var best [2]trial
	for g := range groups {
		best[g] = trial{cost: [2]float64{math.Inf(1), math.Inf(1)}}
		if !wide {
			// The smoothing stays where the wide search put it.
			best[g] = try(hint[g])
			continue
		}
		bestDecade := 0.0
		for _, e := range wideDecades {
			if t := try(hint[g] * math.Pow(10, e)); t.cost[g] < best[g].cost[g] {
				best[g], bestDecade = t, e
			}
		}
		for _, de := range []float64{-0.25, 0.25} {
			if t := try(hint[g] * math.Pow(10, bestDecade+de)); t.cost[g] < best[g].cost[g] {
				best[g] = t
			}
		}
	}
	for g := range groups {
		if best[g].res == nil {
			return nil, fmt.Errorf("refine: the spline through %d landmarks and %d pairs could not be fitted at any smoothing", p.Len(), st.nodes)
		}
	}
	st.smoothing = [2]float64{best[0].sm, best[0].sm}
	st.loo = append([]transform.Vec(nil), best[0].res.LOO...)
	st.looFactor = make([]transform.Vec, len(st.loo))
	for i, f := range best[0].res.LOOFactor {
		st.looFactor[i] = transform.Vec{f, f, f}
	}
	st.transform = best[0].res.Transform
	if len(groups) > 1 && best[1].sm != best[0].sm {
		st.smoothing[1] = best[1].sm
		sp, err := best[0].res.Transform.(*transform.Spline).WithAxesFrom(best[1].res.Transform.(*transform.Spline), 2)
		if err != nil {
			return nil, fmt.Errorf("refine: %w", err)
		}
		st.transform = sp
		for i := range st.loo {
			st.loo[i][2] = best[1].res.LOO[i][2]
			st.looFactor[i][2] = best[1].res.LOOFactor[i]
		}
	}
	meanW := 0.0
	for _, w := range st.weights {
		meanW += w
	}
	meanW /= float64(len(st.weights))
	// The prediction factor of each node pair's cell without its own pair:
	// its leave-one-out factor less the pair's own noise as the fit models
	// it (its nugget S·w̄/w), axis by axis.
	var nugget transform.Vec
	for a := range r.dim {
		nugget[a] = st.smoothing[min(a/2, 1)] * meanW / r.pairWeight
	}
	k := p.Len()
	heldFactor := make([]transform.Vec, len(pairs))
	for i := range pairs {
		if pairs[i].Node {
			pairs[i].LOO = st.loo[k]
			for a := range r.dim {
				heldFactor[i][a] = math.Max(st.looFactor[k][a]-nugget[a], 0)
			}
			k++
		}
	}
	st.scale = axisScale(st.loo, st.looFactor, r.dim, clean)

	// The error model was fitted to the landmarks alone; with the pairs
	// as nodes the refined spline's radii rest on the kriging variance,
	// scaled per axis by the calibration on the pairs.
	u := r.base.WithoutField()
	u.Scale = st.scale
	u.NoiseFactor = st.smoothing[0] * meanW
	u.Source = st.src
	u.Weights = st.weights
	st.uncertainty = &u

	// Each node pair's held-out prediction; the other pairs are held out by
	// construction, and are judged by the fit itself. Each pair's 95 %
	// radius is that of its leave-one-out error: its cell's mapping error
	// and the candidate's spread.
	pred, err := transform.NewPredictor(st.transform, st.src, st.weights)
	if err != nil {
		return nil, fmt.Errorf("refine: %w", err)
	}
	st.pairFactor = heldFactor
	for i := range pairs {
		pr := &pairs[i]
		if pr.Node {
			st.heldOut = append(st.heldOut, register.HeldOut{
				ID: r.in.SomaIDs[pr.Soma], Source: pr.Source,
				Predicted: pr.Target.Sub(pr.LOO), Factor: heldFactor[i],
			})
		} else {
			pr.LOO = pr.Target.Sub(st.transform.Apply(pr.Source))
			f := pred.Factor(pr.Source)[0][0]
			st.pairFactor[i] = transform.Vec{f, f, f}
		}
	}
	st.pairs = pairs
	r.pairRadii(st)
	return st, nil
}

// pairRadii sets each pair's 95 % radius: that of its leave-one-out error,
// its cell's mapping error and the candidate's spread together.
func (r *refiner) pairRadii(st *fitState) {
	noise := r.pairNoise()
	for i := range st.pairs {
		var cov transform.Mat
		for a := range r.dim {
			cov[a][a] = st.scale[a]*st.pairFactor[i][a] + noise[a]
		}
		st.pairs[i].R95 = r.radii.Radius(cov)
	}
}

// chooseNodes picks which pairs become nodes: all of them within budget,
// else one pair per box of a regular grid whose box is the smallest that
// leaves at most budget boxes occupied, the likeliest pair of each box (the
// lower soma index on a tie). The nodes then spread over the volume as the
// pairs do, and every region keeps some.
func (r *refiner) chooseNodes(pairs []Pair, budget int) []bool {
	node := make([]bool, len(pairs))
	if budget <= 0 {
		return node
	}
	if len(pairs) <= budget {
		for i := range node {
			node[i] = true
		}
		return node
	}
	lo, hi := pairs[0].Source, pairs[0].Source
	for _, pr := range pairs {
		for a := range r.dim {
			lo[a] = math.Min(lo[a], pr.Source[a])
			hi[a] = math.Max(hi[a], pr.Source[a])
		}
	}
	span := 0.0
	for a := range r.dim {
		span = math.Max(span, hi[a]-lo[a])
	}
	boxes := func(h float64) map[[3]int]int {
		best := map[[3]int]int{}
		for i, pr := range pairs {
			var key [3]int
			for a := range r.dim {
				key[a] = int(math.Floor((pr.Source[a] - lo[a]) / h))
			}
			if j, ok := best[key]; !ok || pr.P > pairs[j].P {
				best[key] = i
			}
		}
		return best
	}
	small, large := span*1e-6, span+1
	for range 50 {
		mid := math.Sqrt(small * large)
		if len(boxes(mid)) > budget {
			small = mid
		} else {
			large = mid
		}
	}
	chosen := boxes(large)
	idx := make([]int, 0, len(chosen))
	for _, i := range chosen {
		idx = append(idx, i)
	}
	sort.Ints(idx)
	for _, i := range idx {
		node[i] = true
	}
	return node
}

// axisScale is the per-axis mean standardised square of a fit's
// leave-one-out errors, as register's check estimates the scale of a
// landmark fit, floored away from zero.
func axisScale(loo, factor []transform.Vec, dim int, use []bool) transform.Vec {
	var s transform.Vec
	n := 0
	for i, e := range loo {
		if !use[i] {
			continue
		}
		n++
		for k := range dim {
			s[k] += e[k] * e[k] / factor[i][k]
		}
	}
	m := 0.0
	for k := range dim {
		s[k] /= float64(max(n, 1))
		m = math.Max(m, s[k])
	}
	for k := range dim {
		s[k] = math.Max(s[k], math.Max(m*1e-12, 1e-24))
	}
	return s
}

// typicalDistance is the mean distance between nodes, over a stride of
// them, as a kernel value in 3-D; its square times its logarithm in 2-D.
func typicalDistance(points []transform.Vec, dim int) float64 {
	sum, n := 0.0, 0
	step := max(1, len(points)/50)
	for i := 0; i < len(points); i += step {
		for j := i + 1; j < len(points); j += step {
			sum += points[i].Sub(points[j]).Norm()
			n++
		}
	}
	d := 1.0
	if n > 0 && sum > 0 {
		d = sum / float64(n)
	}
	if dim == 2 {
		return d * d * math.Max(math.Log(d), 1)
	}
	return d
}

// heldOutJSON is a refinement record with the held-out predictions alone,
// which is what a mapper reads.
func heldOutJSON(h []register.HeldOut) (json.RawMessage, error) {
	if h == nil {
		h = []register.HeldOut{}
	}
	return json.Marshal(struct {
		HeldOut []register.HeldOut `json:"held_out"`
	}{h})
}

// minPairsForScale is the fewest node pairs from which the scale is taken
// from the pairs rather than from every node.
const minPairsForScale = 20

// pairScale is the per-axis scale s (µm²) from the node pairs' leave-one-out
// errors, by the method of moments: the error of pair k along axis a has
// variance s_a·F_k + n_a, F_k the prediction factor of its cell without the
// pair and n_a the pair's stated noise (the soma's localisation error
// through the Jacobian and the candidate's spread), so
//
//	s_a = Σ_k (e_ka² − n_a) / Σ_k F_k.
//
// This calibrates the mapped cells' covariance s·F + (own error) to the
// errors of held-out cells, which is what map's r95 must hold; the scale of
// every node's standardised errors (fallback) lumps the pairs' noise into s
// and made the radii wider than they need be. It is never below a tenth of
// the fallback, so that a few lucky pairs cannot shrink every radius.
func (r *refiner) pairScale(pairs []Pair, factor []float64, fallback transform.Vec) transform.Vec {
	noise := r.pairNoise()
	var num transform.Vec
	den, n := 0.0, 0
	for i, pr := range pairs {
		if !pr.Node {
			continue
		}
		n++
		den += factor[i]
		for a := range r.dim {
			num[a] += pr.LOO[a]*pr.LOO[a] - noise[a]
		}
	}
	if n < minPairsForScale || !(den > 0) {
		return fallback
	}
	var s transform.Vec
	for a := range r.dim {
		s[a] = math.Max(num[a]/den, 0.1*fallback[a])
	}
	return s
}
