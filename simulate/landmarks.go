// The scenario's landmark pairs: picked where a user would find them, and
// some spoiled as users spoil them.

package simulate

import (
	"fmt"
	"math"
	"math/rand/v2"

	"ferry/transform"
)

// landmarkMargin keeps landmarks this far inside the EM block and the field.
const landmarkMargin = 5.0

// pickLandmarks draws the vessel and soma landmarks: one at a time, with a
// chance proportional to how easily a user finds the feature in both
// images, and never closer than the landmark spacing to one already taken.
func (s *Scenario) pickLandmarks() error {
	p := s.Params
	rng := stream(s.Seed, streamLandmarks)
	inner := s.EMBlock.shrink(landmarkMargin)
	field := Box{Max: p.FieldUM}.shrink(landmarkMargin)
	depthWeight := func(z float64) float64 { return math.Exp(-z / p.LandmarkDepthScaleUM) }

	type feature struct {
		at     transform.Vec
		weight float64
		index  int
	}
	var taken []transform.Vec
	// draw takes want features from pool. Where none is left that far from
	// those taken, the spacing is relaxed step by step, as a user would
	// settle for a feature closer to one already picked.
	draw := func(pool []feature, want int, kind string) ([]feature, error) {
		spacing := p.LandmarkMinSpacingUM
		avail := make([]float64, len(pool))
		used := make([]bool, len(pool))
		refresh := func() float64 {
			total := 0.0
			for i, f := range pool {
				avail[i] = f.weight
				if used[i] {
					avail[i] = 0
					continue
				}
				for _, t := range taken {
					if t.Sub(f.at).Norm() < spacing {
						avail[i] = 0
						break
					}
				}
				total += avail[i]
			}
			return total
		}
		total := refresh()
		var out []feature
		for len(out) < want {
			for total == 0 {
				if spacing < 1 {
					return nil, fmt.Errorf("placed only %d of the %d %s landmarks asked for: too few %s features lie inside the EM block", len(out), want, kind, kind)
				}
				spacing *= 0.7
				total = refresh()
			}
			u := rng.Float64() * total
			pick := -1
			for i, w := range avail {
				if w > 0 {
					pick = i // the last positive one, should rounding run past the end
					if u < w {
						break
					}
					u -= w
				}
			}
			f := pool[pick]
			used[pick] = true
			out = append(out, f)
			taken = append(taken, f.at)
			total = 0
			for i := range pool {
				if used[i] || f.at.Sub(pool[i].at).Norm() < spacing {
					avail[i] = 0
				}
				total += avail[i]
			}
		}
		return out, nil
	}

	var vessels []feature
	for i, b := range s.BranchPoints {
		if field.Contains(b.PositionUM) && inner.Contains(s.TrueMap(b.PositionUM)) {
			// Thick vessels show in both images; shallow ones are sharper
			// in vivo.
			vessels = append(vessels, feature{b.PositionUM, b.RadiusUM * b.RadiusUM * depthWeight(b.PositionUM[2]), i})
		}
	}
	chosenV, err := draw(vessels, p.VesselLandmarks, "vessel")
	if err != nil {
		return err
	}
	var somata []feature
	for i, so := range s.Somata {
		// The imaged cells are left to be found by matching, not by hand.
		if so.Cell < 0 && field.Contains(so.PositionUM) && inner.Contains(so.TargetUM) {
			somata = append(somata, feature{so.PositionUM, depthWeight(so.PositionUM[2]), i})
		}
	}
	chosenS, err := draw(somata, p.SomaLandmarks, "soma")
	if err != nil {
		return err
	}

	width := max(2, digits(max(len(chosenV), len(chosenS))))
	for i, f := range chosenV {
		b := s.BranchPoints[f.index]
		truth := s.TrueMap(b.PositionUM)
		s.Landmarks = append(s.Landmarks, Landmark{
			ID:           fmt.Sprintf("v%0*d", width, i+1),
			Kind:         "vessel",
			SourceUM:     b.PositionUM.Add(gauss3(rng, p.VesselSourceSDUM)),
			TargetUM:     truth.Add(gauss3(rng, iso(p.VesselTargetSDUM))),
			TrueSourceUM: b.PositionUM,
			TrueTargetUM: truth,
			Note:         fmt.Sprintf("branch on penetrating vessel %d", b.Vessel+1),
		})
	}
	for i, f := range chosenS {
		so := s.Somata[f.index]
		s.Landmarks = append(s.Landmarks, Landmark{
			ID:           fmt.Sprintf("s%0*d", width, i+1),
			Kind:         "soma",
			SourceUM:     so.PositionUM.Add(gauss3(rng, p.SomaSourceSDUM)),
			TargetUM:     so.TargetUM.Add(gauss3(rng, iso(p.SomaTargetSDUM))),
			TrueSourceUM: so.PositionUM,
			TrueTargetUM: so.TargetUM,
			Note:         "bright soma",
		})
	}
	return nil
}

// spoilLandmarks makes WrongLandmarks of the pairs wrong, alternately a
// wrong correspondence and a wrong slice.
func (s *Scenario) spoilLandmarks() error {
	p := s.Params
	rng := stream(s.Seed, streamWrong)
	var vessels, all []int
	for i, l := range s.Landmarks {
		if l.Kind == "vessel" {
			vessels = append(vessels, i)
		}
		all = append(all, i)
	}
	for k := range p.WrongLandmarks {
		if k%2 == 0 {
			// Wrong correspondence: the target of the nearest other branch
			// point far enough away, as when two branches look alike.
			i, err := s.pickUnspoiled(rng, vessels)
			if err != nil {
				return err
			}
			l := &s.Landmarks[i]
			best, bestD := -1, math.Inf(1)
			for j, b := range s.BranchPoints {
				d := b.PositionUM.Sub(l.TrueSourceUM).Norm()
				if d >= p.WrongMinDistanceUM && d < bestD && s.EMBlock.Contains(s.TrueMap(b.PositionUM)) {
					best, bestD = j, d
				}
			}
			if best < 0 {
				return fmt.Errorf("landmark %s: no other branch point at least %v µm away inside the EM block to make a wrong correspondence", l.ID, p.WrongMinDistanceUM)
			}
			l.TargetUM = s.TrueMap(s.BranchPoints[best].PositionUM).Add(gauss3(rng, iso(p.VesselTargetSDUM)))
			l.Wrong = true
			l.Reason = fmt.Sprintf("wrong correspondence: target is the branch point %s µm away in vivo", formatFloat1(bestD))
			continue
		}
		i, err := s.pickUnspoiled(rng, all)
		if err != nil {
			return err
		}
		l := &s.Landmarks[i]
		dz := p.WrongSliceUM[0] + rng.Float64()*(p.WrongSliceUM[1]-p.WrongSliceUM[0])
		if rng.IntN(2) == 0 {
			dz = -dz
		}
		l.TargetUM[2] += dz
		l.Wrong = true
		l.Reason = fmt.Sprintf("wrong slice: target z off by %s µm", formatFloat1(dz))
	}
	return nil
}

// pickUnspoiled draws a landmark among those in from that is still right.
func (s *Scenario) pickUnspoiled(rng *rand.Rand, from []int) (int, error) {
	var free []int
	for _, i := range from {
		if !s.Landmarks[i].Wrong {
			free = append(free, i)
		}
	}
	if len(free) == 0 {
		return 0, fmt.Errorf("%d wrong landmarks asked for but too few landmarks are left to spoil", s.Params.WrongLandmarks)
	}
	return free[rng.IntN(len(free))], nil
}

// digits is the number of decimal digits of n (at least 1).
func digits(n int) int {
	d := 1
	for n >= 10 {
		n /= 10
		d++
	}
	return d
}
