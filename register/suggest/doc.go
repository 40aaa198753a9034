// Package suggest says where to pick the next landmarks so that the mapped
// cells' uncertainty shrinks most: the `ferry suggest` command.
//
// # Why the gain of a landmark is known before it is picked
//
// The covariance of a mapped cell (register.UncertaintyModel) is built from
// the fitted model's prediction factor F(x). Under the model behind F — a
// Gaussian process whose generalised covariance is the thin-plate kernel
// for the spline (kriging), the linearised least-squares fit for the linear
// models (Fitzpatrick, West and Maurer 1998, IEEE Trans. Med. Imaging
// 17(5):694–702) — one more landmark at a source point z, whose target
// error has variance ν·s (ν the uncertainty model's noise factor: the
// smoothing S for the spline, 1 for the linear models), changes the factor
// everywhere to
//
//	F′(x) = F(x) − C(x, z)·(F(z) + ν·I)⁻¹·C(z, x)
//
// with C the posterior covariance between the errors at two points
// (transform.CrossPredictor). The target of the new landmark does not
// appear: the variance after adding a landmark depends only on where it
// is. For the linear models this is the Sherman–Morrison–Woodbury update of
// the inverse normal matrix (Sherman and Morrison 1950, Ann. Math. Stat.
// 21(1):124–127, cited from memory); for a rigid motion or a similarity
// it is exact for a landmark whose target lies where the fit predicts it
// and holds to first order otherwise.
//
// # The search
//
// Candidate locations are the points of a --where file (for example vessel
// branch points seen in vivo), or by default a regular grid over the
// bounding box of the landmarks' source positions and the cells: its
// spacing is the largest for which the grid has at least GridTarget (4000)
// nodes, and the nodes are centred in the box (Grid). For a rigid motion or
// a similarity, whose covariance is a low-degree polynomial of position and
// whose search costs more per node, the grid has BlockGridTarget (500).
//
// The objective is the median over the cells of their 95 % radius r95,
// computed exactly as `ferry map` computes it: the per-axis scale s, the
// noise factor ν and, with a cell localisation error, the landmarks'
// picking noise taken out and the cell's own carried through the Jacobian.
// The K locations are chosen greedily: each is the candidate whose addition
// lowers the median most given the ones chosen before it (ties go to the
// lower mean r95, then to the earlier candidate). Greedy choice is the
// standard way to place sensors under such variance-reduction objectives;
// it is not guaranteed optimal for a median. After each choice the
// covariances between the cells and the candidates are updated by the
// rank-one (for the scalar factors of the spline, the translation and the
// affine map) or rank-dim (rigid motion, similarity) correction above,
// which is the low-rank form of the conditioning on all chosen points: the
// covariance after z₁…z_j is C − Σ_l U_l(x)U_l(z)ᵀ, U_l the scaled
// covariance with z_l after the ones before it.
//
// For the scalar factors the search holds the covariances between the
// cells and the candidates in memory (eight bytes a pair), updates them
// after each choice, and evaluates each cell's r95 from a table of its r95
// against its remaining variance (radiusKnots knots, linear in √(σ² + ν),
// exact when the cell has no own localisation error). Most candidates
// cannot beat the best median found so far, and a count of the cells whose
// variance would fall far enough shows it without a median (see
// scalarSearch.run); the choice is the one scoring every candidate would
// make. When the pairs would need more than maxPairs numbers the search
// looks at every k-th cell only. The radii reported (R95After, Gain, the
// per-cell radii) are always computed exactly over all cells from the
// chosen locations, by the same conditioning.
//
// # What is kept fixed
//
// The transform's model, its smoothing S, the per-axis scale s and the
// landmark weights are those of the current fit: the search asks how the
// current model's uncertainty shrinks, not whether a richer model would be
// chosen with more landmarks. A new landmark gets the mean weight of the
// existing ones. The spline's posterior covariance is exact (no
// neighbourhood approximation; see transform.NewCrossPredictor), so for a
// spline of more than 64 landmarks the r95 values here can be a little
// smaller than those of `ferry map`, whose neighbourhood variances are
// never below the exact ones.
//
// Each suggestion comes with the target position the current fit predicts
// for it and that prediction's 95 % radius (the predictive covariance of a
// new landmark there, picking noise included), which says how far to look
// in the EM volume.
package suggest
