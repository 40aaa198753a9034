// Package review is `ferry review`: a local web page for confirming matches
// by eye, one cell at a time, with every decision written at once to a
// decisions file.
//
// The library part builds what the page shows: the order of the cells
// (ambiguous first, then by the probability of the proposed choice, lowest
// first), each cell's candidates in reach with their posterior
// probabilities and the probability of no counterpart, its neighbours and
// their accepted matches, and the image crops: the in vivo stack resampled
// into the EM frame through the transform and the EM stack around the mapped
// position, in a plane through the cell (xy) and an orthogonal slice (xz),
// at the same scale. Only the pages and strips a crop needs are read from
// the stacks (imaging.Volume). The HTTP handlers serve the page and its
// scripts from files embedded in the binary: nothing is fetched from the
// network. Decisions are kept in a landmarks.DecisionSet and the whole file
// is rewritten through outfile after each one, so it is always
// whole, and a later session with the same file resumes where the last one
// stopped.
package review
