// Package status is the one vocabulary of the verdicts ferry gives a cell:
// how it was mapped (ok, isolated, extrapolated, folded, no_inverse) and how
// it was matched (matched, ambiguous, unmatched). Mapping and matching set
// them; the tables write them; the report, the overlay, review and export
// switch on them. The words are those of the status columns of
// docs/formats.md.
//
// It imports nothing of ferry, so that every package can use it.
package status
