package status

// Status is the verdict on one cell, a word of the status columns of
// docs/formats.md.
type Status string

// The statuses of a mapped cell, from the least to the most serious; a cell
// gets the most serious that applies.
const (
	// OK: inside the landmarks' hull and near a landmark.
	OK Status = "ok"
	// Isolated: inside the landmarks' hull but farther than a few typical
	// spacings from every landmark.
	Isolated Status = "isolated"
	// Extrapolated: outside the landmarks' hull.
	Extrapolated Status = "extrapolated"
	// Folded: the transform folds here, so positions are not one-to-one.
	Folded Status = "folded"
	// NoInverse: mapping back, no source point maps onto the cell; its
	// mapped position is meaningless.
	NoInverse Status = "no_inverse"
)

// The statuses of a match.
const (
	// Matched: the cell's counterpart is the candidate named, with
	// posterior probability at least the matching threshold.
	Matched Status = "matched"
	// Ambiguous: the candidate named is the likeliest, but not clearly;
	// the runner-up is named beside it.
	Ambiguous Status = "ambiguous"
	// Unmatched: the cell most probably has no counterpart among the
	// candidates.
	Unmatched Status = "unmatched"
)

// Mapping lists the statuses of a mapped cell from the least to the most
// serious, the order of the tables and legends.
func Mapping() []Status { return []Status{OK, Isolated, Extrapolated, Folded, NoInverse} }

// Matching lists the statuses of a match in the order of the tables.
func Matching() []Status { return []Status{Matched, Ambiguous, Unmatched} }

// IsMapping reports whether s is a status of a mapped cell.
func (s Status) IsMapping() bool {
	switch s {
	case OK, Isolated, Extrapolated, Folded, NoInverse:
		return true
	}
	return false
}

// IsMatching reports whether s is a status of a match.
func (s Status) IsMatching() bool {
	switch s {
	case Matched, Ambiguous, Unmatched:
		return true
	}
	return false
}

// String is the word itself.
func (s Status) String() string { return string(s) }
