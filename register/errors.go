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
