// Package simulate makes a synthetic scenario with known truth: a block of
// mouse visual cortex seen twice, once by in vivo two-photon imaging (the
// source) and once by electron microscopy (the target), with the landmark
// pairs a user would pick, the imaged cells to be traced, the EM nuclei
// they must be matched to, and the truth that links them. It is the ground
// truth of ferry's end-to-end tests and the data of `ferry demo`.
//
// # The tissue
//
// The source space is the in vivo field in micrometres, [0, FieldUM] on
// each axis: x and y lateral, z the depth below the pia. Into it go
//
//   - a vessel tree: a handful of penetrating vessels descend from the pia,
//     bending a little at each straight segment and giving off side
//     branches at random, with radii split by Murray's law down to the
//     capillary radius; the places where a side branch leaves are the
//     vessel landmark candidates (BranchPoint), and the segments
//     (Segment: start, end, radius) are kept for rendering images;
//   - neuronal somata at a set density with a minimum centre-to-centre
//     spacing, placed by dart throwing (random sequential addition) with a
//     grid accelerator, kept clear of the vessels, and far sparser in
//     layer 1. The default density, 9·10⁴ per mm³ below layer 1, and the
//     12 µm spacing are recalled from memory of the anatomical literature
//     (mouse cortex holds on the order of 10⁵ neurons per mm³), not taken
//     from a particular source;
//   - non-neuronal nuclei (glia anywhere, endothelial nuclei on the vessel
//     walls), which appear in EM but have no in vivo counterpart.
//
// # The true map
//
// The true source→target map (TrueMapModel) is, in order: a depth
// compression that grows with depth (the local ∂z′/∂z runs linearly from
// ZCompressionTop at the pia to ZCompressionBottom at the bottom of the
// field), an anisotropic lateral shrinkage, a mirror of x (the EM block
// imaged from its far face), a small rotation, all about the field's
// centre, then a smooth warp (a sum of broad Gaussian displacement bumps of
// a few micrometres) and the offset that places the block in the EM
// dataset, some 10⁴ µm from its origin. Scenario.TrueMap applies it,
// Scenario.TrueJacobian differentiates it in closed form and
// Scenario.TrueInverse inverts it by Newton's iteration.
//
// # What is observed
//
//   - The EM block is a box of target space: the mapped field with a strip
//     cut off two of its sides, so that the share EMCoverage of the imaged
//     cells lies inside. The others have no counterpart.
//   - Imaged cells (cells.csv): a subset of the somata lying in a few
//     imaging planes, with in vivo localisation noise (z several times
//     worse than x and y) and functional measures passed through.
//   - Candidates (candidates.csv): the nucleus centroid of every soma inside
//     the EM block (the soma's true target plus a soma-to-nucleus offset and
//     picking noise), and the non-neuronal nuclei, numbered section by
//     section so that an id says nothing of the kind.
//   - Landmarks (landmarks.csv): vessel branch points and distinctive somata
//     inside the EM block, drawn one at a time with a preference for thick
//     vessels and shallow depths (where a user finds them) and a minimum
//     spacing, with picking noise on both sides. WrongLandmarks of them are
//     wrong, alternately a wrong correspondence (the target of another
//     nearby branch point) and a wrong slice (the target z off by 20–30 µm).
//
// Generate builds a Scenario; its exported fields hold the truth for tests
// (each cell's true target and candidate, each landmark's wrong flag).
// Scenario.Write writes the input files (docs/formats.md) and the truth files, each
// whole or not at all. docs/simulation.md describes the files and the
// defaults.
//
// # Determinism
//
// Every random draw comes from math/rand/v2's PCG seeded by the seed, one
// stream per stage (map, vessels, somata, cells, candidates, non-neuronal
// nuclei, landmarks, wrong landmarks), and nothing runs concurrently: the
// same Params and seed give byte-identical files on every run and any
// GOMAXPROCS, and changing a knob of a late stage leaves the draws of the
// earlier ones alone.
package simulate
