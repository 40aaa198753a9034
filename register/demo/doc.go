// Package demo runs the whole job of ferry on the built-in invented
// scenario: it simulates a block with known truth, checks the landmarks,
// fits the transform without the landmarks the check flags (as a user who
// looked at them would), maps and matches the imaged cells, writes every file
// a user would have, and then compares what it found with the truth.
//
// The scenario belongs to no real experiment: its lab, numbers and names are
// our own (simulate, docs/simulation.md).
package demo
