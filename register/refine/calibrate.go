package refine

import (
	"math"

	"ferry/register/match"
	"ferry/status"
	"ferry/transform"
)

// calibrationRounds is how many times the scale of the last fit is
// re-estimated from the matches it gives; every round's fit gets one.
const calibrationRounds = 3

// calibrate re-estimates the per-axis scale s of the refined fit from every
// soma's match, as the variance of a mixture model is re-estimated in
// expectation–maximisation (the σ² step of coherent point drift: Myronenko
// & Song 2010, IEEE TPAMI 32(12):2262–2275). The offset of a soma's
// counterpart from its mapped position has covariance s·F + O + σ²·I, F the
// prediction factor there (without the soma's own pair), O the soma's own
// localisation error carried into the target and σ the candidates' stated
// spread; so, with each soma weighted by the posterior probability p of each
// of its candidates,
//
//	s_a = Σ p·(e_a² − O_aa − σ²) / Σ p·F.
//
// Every soma takes part, the ambiguous ones with their probabilities: the
// pairs alone are the ones with small errors, and would make s too small.
// The spline's own split of each pair's error into map and noise (its
// smoothing) made s too large: its noise is one number for all three axes,
// and in vivo z is several times worse than x and y.
func (r *refiner) calibrate(st *fitState, rounds int) error {
	own := r.ownNoise()
	cand := r.opt.CandidateSD * r.opt.CandidateSD
	for range rounds {
		mapper, err := r.mapper(st)
		if err != nil {
			return err
		}
		res, err := match.Match(mapper, r.in.Somata, r.opt.CellSD, r.candPos, match.Options{
			Dim: r.dim, CandidateSD: r.opt.CandidateSD, CellIDs: r.in.SomaIDs, CandidateIDs: r.candIDs, Decisions: r.dec,
		})
		r.rep.Add(1)
		if err != nil {
			return err
		}
		var num, den transform.Vec
		for _, m := range res {
			// A decided soma says nothing of the scale: an accepted one
			// is a landmark of the fit, so its offset is no prediction.
			if m.Decision != "" {
				continue
			}
			for _, c := range []struct {
				j int
				p float64
			}{{m.Candidate, m.PMatch}, {m.RunnerUp, m.PRunnerUp}} {
				if c.j < 0 || c.p <= 0 || m.Mapped.Status == status.Folded {
					continue
				}
				e := r.candPos[c.j].Sub(m.Mapped.Pos)
				for a := range r.dim {
					f := math.Max(m.Mapped.Cov[a][a]-own[a], 0) / st.scale[a]
					num[a] += c.p * (e[a]*e[a] - own[a] - cand)
					den[a] += c.p * f
				}
			}
		}
		next := st.scale
		for a := range r.dim {
			if den[a] > 0 {
				// Never below a tenth of the spline's own estimate, so
				// that a run of lucky matches cannot shrink every radius.
				next[a] = math.Max(num[a]/den[a], 0.1*st.scale[a])
			}
		}
		st.scale = next
		st.uncertainty.Scale = next
	}
	r.pairRadii(st)
	return nil
}

// ownNoise is the somata's own localisation error carried into the target
// through the landmark fit's Jacobian, per axis (µm²); without --cell-sd,
// the landmarks' picking noise, as map takes it.
func (r *refiner) ownNoise() transform.Vec {
	if r.opt.CellSD == nil {
		return r.landmarkNoise()
	}
	jac := r.a.Result.Transform.Jacobian(centroid(r.in.Landmarks.Source))
	var n transform.Vec
	for k := range r.dim {
		for l := range r.dim {
			n[k] += jac[k][l] * jac[k][l] * r.opt.CellSD[l] * r.opt.CellSD[l]
		}
	}
	return n
}
