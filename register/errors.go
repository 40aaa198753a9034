package register

import "errors"

// The conditions a caller must tell apart, matched with errors.Is. Each
// error keeps its own message, which says what was found and what to do;
// the sentinel only names the kind. transform.ErrTooFewPairs (a check or
// fit given fewer pairs than its model needs), transform.ErrSingular and
// transform.ErrNoConvergence (no inverse) arise there; ErrNoSidecar beside
// ReadSidecar.

// ErrTooLarge is matched by the refusal of a job that needs more memory
// than the machine has (JobEstimate.CheckMemory).
var ErrTooLarge = errors.New("job too large for this machine")

// ErrChainUncertainty is matched by the refusal of NewMapper to map
// through a chain of transforms (transform.Chain) with uncertainty: the
// uncertainty model a transform file holds belongs to one fitted transform,
// and each step of a chain was fitted to landmarks of its own.
var ErrChainUncertainty = errors.New("no uncertainty model for a chain of transforms")

// PairError is a fault of one landmark pair found before any fit: two
// pairs at one source position (for a spline), or a pair far out of line
// with all the others. Its message speaks of the pairs; ID names the pair
// to leave out, and Affine reports that an affine model would fit despite
// the fault, for a caller to turn into its own advice.
type PairError struct {
	ID     string
	Affine bool
	Msg    string
}

// Error is the message.
func (e *PairError) Error() string { return e.Msg }
