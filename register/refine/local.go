package refine

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/spatial/kdtree"

	"ferry/register"
	"ferry/transform"
)

// The scale s of the refined fit is one number per axis, calibrated on every
// soma's match (calibrate.go), and the prediction factor F says only where
// the nodes are sparse. Where the warp changes faster than the spline can
// follow (a kink between sheared sections), the errors are larger than s·F
// over a whole region, and a single scale lets the radii there hold far
// fewer than 95 % of the true positions. The pairs' own held-out errors say
// where: each soma's factor is multiplied, per axis, by the method-of-moments
// ratio of the errors to s·F over its nearest pairs (its own pair left
// out), shrunk towards 1 by localPrior pairs' worth of the average and
// never below 1. This is local calibration of a variance from held-out
// residuals, as in the locally weighted conformal intervals of Lei, G'Sell,
// Rinaldo, Tibshirani & Wasserman (2018, JASA 113(523):1094–1111), with
// the ratio in place of a quantile.
const (
	// localPairs is how many of the nearest pairs judge a soma's region.
	localPairs = 10
	// localPrior is the weight, in pairs, of the global calibration.
	localPrior = 5.0
)

// inflateLocally widens each soma's prediction factor where the nearby
// pairs' held-out errors are larger than the fit's scale says: the node
// pairs' held-out predictions, and for any other soma whose factor grows a
// held-out entry with the fit's own prediction (no pair of its own is in
// the fit), so that map and match read the wider factor at its position.
// The pairs' own reported radii keep the fit's scale: the widening comes
// from the pairs' errors, and judging the pairs by it would be circular.
func (r *refiner) inflateLocally(st *fitState) error {
	if len(st.pairs) < localPairs+1 {
		return nil
	}
	dim := r.dim
	noise := r.pairNoise()
	num := make([]transform.Vec, len(st.pairs))
	den := make([]transform.Vec, len(st.pairs))
	var meanDen transform.Vec
	for k, pr := range st.pairs {
		for a := range dim {
			num[k][a] = pr.LOO[a]*pr.LOO[a] - noise[a]
			den[k][a] = st.scale[a] * st.pairFactor[k][a]
			meanDen[a] += den[k][a] / float64(len(st.pairs))
		}
	}
	point := func(x transform.Vec) kdtree.Point {
		p := make(kdtree.Point, dim)
		copy(p, x[:dim])
		return p
	}
	pts := make(kdtree.Points, len(st.pairs))
	at := make(map[transform.Vec][]int, len(st.pairs))
	for k, pr := range st.pairs {
		pts[k] = point(pr.Source)
		at[pr.Source] = append(at[pr.Source], k)
	}
	tree := kdtree.New(pts, false)
	pairOf := make(map[int]int, len(st.pairs))
	for k, pr := range st.pairs {
		pairOf[pr.Soma] = k
	}
	// ratio is soma i's inflation per axis, its own pair left out.
	ratio := func(i int) transform.Vec {
		keep := kdtree.NewNKeeper(localPairs + 1)
		tree.NearestSet(keep, point(r.in.Somata[i]))
		var sn, sd transform.Vec
		used := 0
		seen := map[int]bool{}
		for _, c := range keep.Heap {
			if c.Comparable == nil {
				continue
			}
			var x transform.Vec
			copy(x[:dim], c.Comparable.(kdtree.Point))
			for _, k := range at[x] {
				if seen[k] || st.pairs[k].Soma == i || used == localPairs {
					continue
				}
				seen[k] = true
				used++
				for a := range dim {
					sn[a] += num[k][a]
					sd[a] += den[k][a]
				}
			}
		}
		var f transform.Vec
		for a := range dim {
			f[a] = 1
			if d := sd[a] + localPrior*meanDen[a]; d > 0 {
				f[a] = math.Max(1, (sn[a]+localPrior*meanDen[a])/d)
			}
		}
		return f
	}
	pred, err := transform.NewPredictor(st.transform, st.src, st.weights)
	if err != nil {
		return fmt.Errorf("refine: %w", err)
	}
	held := make(map[string]int, len(st.heldOut))
	for h, e := range st.heldOut {
		held[e.ID] = h
	}
	decided := func(i int) bool {
		d := r.in.Decisions
		if d == nil {
			return false
		}
		_, acc := d.Accepted[i]
		return acc || d.None[i]
	}
	seenSource := map[transform.Vec]bool{}
	for _, e := range st.heldOut {
		seenSource[e.Source] = true
	}
	for i, x := range r.in.Somata {
		if decided(i) {
			continue
		}
		f := ratio(i)
		if k, ok := pairOf[i]; ok {
			if h, ok := held[r.in.SomaIDs[i]]; ok && st.pairs[k].Node {
				for a := range dim {
					st.heldOut[h].Factor[a] *= f[a]
				}
				continue
			}
		}
		if f == (transform.Vec{1, 1, 1}) || (dim == 2 && f[0] == 1 && f[1] == 1) || seenSource[x] {
			continue
		}
		// A soma that is not a node: the fit's own prediction, with the
		// factor widened.
		m := pred.Factor(x)
		var fac transform.Vec
		for a := range dim {
			fac[a] = m[a][a] * f[a]
		}
		seenSource[x] = true
		st.heldOut = append(st.heldOut, register.HeldOut{ID: r.in.SomaIDs[i], Source: x, Predicted: st.transform.Apply(x), Factor: fac})
	}
	return nil
}
