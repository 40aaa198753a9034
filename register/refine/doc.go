// Package refine refines a landmark registration with the somata
// themselves: every imaged cell is a soma, and the candidates (EM nuclei)
// hold its counterpart. It is `ferry refine`; docs/methods.md describes the
// method and docs/refine.md what it achieves.
//
// The landmarks are fitted as `ferry fit` fits them (register.Assess). Then,
// round by round, the in vivo somata are matched to the candidates under
// the current transform and its uncertainty with the model of package match
// (Gaussian offsets, a local density of candidates that are nobody's
// counterpart, a no-counterpart option, one to one), and the pairs that are
// clear (posterior probability above a threshold that is lowered over the
// first rounds, the runner-up negligible) become pseudo-landmarks of kind
// soma: the thin-plate spline is refitted to the landmarks and these pairs
// together, each weighted by the precision of its kind, its smoothing for x
// and y and for z chosen apart by exact leave-one-out (in vivo z is several
// times noisier), and its per-axis scale re-estimated from every soma's
// match. The transform's uncertainty shrinks where pairs
// are added, more cells become clear, and the rounds stop once the pairs no
// longer change. This is a hard-assignment, annealed variant of robust
// point matching (Chui & Rangarajan 2003, Computer Vision and Image
// Understanding 89(2–3):114–141): the correspondences are probabilistic,
// with an outlier (no-counterpart) option, the transform a thin-plate
// spline, and the threshold on the correspondences is lowered over the
// rounds as their temperature is there; unlike it, only confident pairs
// enter the fit, so a doubtful one cannot pull the spline towards itself.
//
// Where the fit is off by more than its radius, a soma is matched once at
// the offset on which most of its neighbours find a candidate each (a local
// Hough vote over translations, constellation.go); its pair must then be
// confirmed by the refitted spline in the rounds after. At the end each
// soma's radius is widened where the nearby pairs' held-out errors exceed
// the fit's scale (local.go).
//
// # Honesty
//
// A cell whose pair is a node of the refined spline is judged (by map and
// match) by its exact leave-one-out prediction, recorded in the transform
// file (register.HeldOut): its own pair never vouches for it. The landmarks
// are independent evidence: their leave-one-out errors before and after are
// reported, and a refinement that predicts them worse is refused, as is
// one whose pairs' held-out errors share a common offset. Past
// Options.MaxNodes nodes, only a spatially even subset of the pairs become
// nodes; the other cells are then held out by construction.
package refine
