package refine

import (
	"math"

	"ferry/transform"
)

// landmarkNoise is the landmarks' noise variance per target axis (µm²):
// from the stated picking errors, else the noise part of the landmark
// model's scale (its nugget s·S for the spline, all of it for a linear
// model, as register's uncertainty model takes it).
func (r *refiner) landmarkNoise() transform.Vec {
	jac := r.a.Result.Transform.Jacobian(centroid(r.in.Landmarks.Source))
	s := r.opt.Settings
	var n transform.Vec
	if s.SourceSD != nil || s.TargetSD != nil {
		for k := range r.dim {
			if s.SourceSD != nil {
				for l := range r.dim {
					n[k] += jac[k][l] * jac[k][l] * s.SourceSD[l] * s.SourceSD[l]
				}
			}
			if s.TargetSD != nil {
				n[k] += s.TargetSD[k] * s.TargetSD[k]
			}
		}
		return n
	}
	for k := range r.dim {
		n[k] = r.base.Scale[k] * r.base.NoiseFactor
	}
	return n
}

// pairNoise is a pair's noise variance per target axis (µm²): the soma's
// localisation error carried through the landmark fit's Jacobian and the
// candidate's spread about the soma centre.
func (r *refiner) pairNoise() transform.Vec {
	var n transform.Vec
	cell := r.opt.CellSD
	if cell == nil {
		n = r.landmarkNoise()
	} else {
		jac := r.a.Result.Transform.Jacobian(centroid(r.in.Landmarks.Source))
		for k := range r.dim {
			for l := range r.dim {
				n[k] += jac[k][l] * jac[k][l] * cell[l] * cell[l]
			}
		}
	}
	for k := range r.dim {
		n[k] += r.opt.CandidateSD * r.opt.CandidateSD
	}
	return n
}

// minNoiseUM2 keeps a weight finite when the landmarks fit exactly.
const minNoiseUM2 = 0.01

// relativePairWeight is the precision of a pair over that of a landmark of
// weight 1, from their noise variances summed over the axes.
func (r *refiner) relativePairWeight() float64 {
	l, p := r.landmarkNoise(), r.pairNoise()
	sl, sp := 0.0, 0.0
	for k := range r.dim {
		sl += l[k]
		sp += p[k]
	}
	return math.Max(sl, minNoiseUM2) / math.Max(sp, minNoiseUM2)
}

func centroid(points []transform.Vec) transform.Vec {
	var c transform.Vec
	for _, p := range points {
		c = c.Add(p)
	}
	return c.Scale(1 / float64(max(len(points), 1)))
}
