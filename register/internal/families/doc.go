// Package families draws landmark sets and held-out cells with known truth
// for the statistical tests of the check and of the error model. It is
// independent of simulate on purpose: the claims about false
// flags, detection and the calibration of r95 are tested on warps that
// simulator does not produce (local Gaussian displacement bumps of several
// sizes, smooth polynomials, depth-dependent section compression, sheared
// sections, with mirror and rotation), so that nothing is tuned to one
// generator. Everything is invented: it is test data, not a model of any
// real block.
package families
