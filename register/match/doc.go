// Package match assigns each imaged cell, mapped into the target through a
// fitted transform, to at most one candidate (an EM nucleus, say), never one
// candidate to two cells, with the posterior probability of each choice and
// an explicit "no counterpart" outcome. It is `ferry match`; docs/matching.md
// describes the method for users.
//
// # The model
//
// A cell mapped with register.Mapper has a position μ and a covariance P
// (µm²). Its counterpart, if it has one among the candidates, lies at
// μ + ε with ε ~ N(0, S), S = P + σ²·I, where σ (Options.CandidateSD,
// default DefaultCandidateSD = 1.5 µm) is the candidate's own spread about
// the soma centre: its localisation error and the soma-to-nucleus offset.
// Every other candidate near the cell is one that is not its counterpart;
// those are taken to form a Poisson field of local density ρ. This is the
// likelihood-ratio model of cross-identification between catalogues
// (Sutherland & Saunders 1992, MNRAS 259:413–420; Budavári & Szalay 2008,
// ApJ 679:301–309) and of data association in target tracking with clutter
// and missed detections.
//
// Under it the odds of the options of one cell, taken alone, are
//
//	candidate j: π·c·N(y_j − μ; 0, S) / ρ     no counterpart: 1 − π·c
//
// where π is the share of cells inside the candidates' volume that have a
// counterpart there and c the chance that this cell's counterpart lies
// inside that volume at all.
//
//   - Reach. Only candidates within the radius that holds 99.99 % of
//     N(0, S) are weighed: √(λ_max·χ²_d(0.9999)), λ_max the largest
//     eigenvalue of S (χ²₃(0.9999) = 21.11, χ²₂(0.9999) = 18.42), found in a
//     k-d tree of the candidates. The 64 likeliest enter the assignment; any
//     further ones only add to the cell's normaliser.
//   - Density ρ. The k-th-nearest-neighbour estimate (Loftsgaarden &
//     Quesenberry 1965, Ann. Math. Statist. 36:1049–1051) around μ with
//     k = 16: (k − 1) candidates, the counterpart left out, over the part
//     of the ball of the 16th neighbour that lies inside the candidates'
//     volume (its cap beyond the nearest face is cut off).
//   - Reach. Only the candidates within the reach of some cell (the larger
//     of its search radius and its 16th-neighbour distance) take part, so
//     that an EM export larger than the imaged field changes nothing: far
//     candidates would widen the volume and lower the estimated π.
//   - Volume and c. The candidates' volume is their convex hull grown by
//     half their median nearest-neighbour spacing (the outermost candidates
//     lie about that far inside the searched volume), held as support
//     planes in 642 directions and along the coordinate and principal
//     axes. c = Φ(h/s_n), h the signed depth of μ below the nearest face
//     (negative outside) and s_n the standard deviation of S across it. A cell outside the volume by more than its own 95 %
//     radius (register.Mapped.R95) gets c = 0: it is unmatched whatever
//     lies nearest, as are cells with no candidate in reach. Cells imaged in
//     vivo beyond the EM block are common; they must not be matched to
//     whatever lies at the block's face.
//   - Prior π. Unless Options.PriorCounterpart gives it, π is estimated
//     from the cells themselves (empirical Bayes): the maximum of the
//     marginal likelihood Π_i (1 − π c_i + π c_i Λ_i), Λ_i the sum of cell
//     i's likelihood ratios, under a Beta(18, 2) prior (centred on 0.9 and
//     worth 20 cells) and never above 0.99, so that at least one cell in a
//     hundred is taken to lack a detected counterpart.
//
// # One to one
//
// The cells' odds are not independent: a candidate can be the counterpart of
// one cell only. The marginal posterior probability of each option under
// that constraint is summed exactly over all joint assignments on each
// connected component of the graph of cells and candidates with at most
// 65 536 of them, which is nearly every component where cells are sparse
// among the candidates, and computed by belief propagation on the others
// (Williams & Lau 2014, IEEE Trans. Aerospace and Electronic Systems
// 50(4):2942–2959), which is exact on components without cycles. The
// assignment is then the one that maximises the total log posterior of the
// choices, each cell having a no-match column of its own: a rectangular
// linear assignment problem, solved on each connected component of the
// sparse graph by the shortest augmenting path method of Jonker & Volgenant
// (1987, Computing 38:325–340) in the rectangular form of Crouse (2016,
// IEEE Trans. Aerospace and Electronic Systems 52(4):1679–1696), with
// Dijkstra's search over the sparse edges. gonum has no assignment solver.
//
// # Status
//
//   - status.Unmatched: the assignment chose no counterpart. PMatch is then
//     the posterior probability of no counterpart.
//   - status.Matched: the assigned candidate has posterior probability at
//     least Options.MinPMatch (default 0.95), which leaves at most 0.05 to
//     the runner-up and the no-match option together, so the runner-up is
//     at most a nineteenth of the match; and the cell's mapping is not
//     folded.
//   - status.Ambiguous: any other assignment; the runner-up (the likeliest
//     other candidate, when one has a posterior probability of at least
//     10⁻⁴) is named beside it, and PNone says how likely no counterpart is.
//
// DistanceUM is the distance to the assigned candidate or, for an unmatched
// cell, to the nearest candidate.
//
// # Determinism
//
// The result depends only on the inputs: with Options.CellIDs and
// Options.CandidateIDs set, candidates and cells are ranked by id and every
// exact tie is broken by that rank, so reordering the rows of the files
// changes nothing. The work is spread over the cores cell by cell, with no
// shared sums.
//
// The literature is cited from memory.
package match
