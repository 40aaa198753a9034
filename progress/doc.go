// Package progress carries the progress of long steps from the library to
// whoever shows it.
//
// Library code takes a Reporter and calls Step for each stage it starts and
// Add as work is done; it never decides whether or how progress is shown.
// The command line passes Terminal, which draws a bar on a terminal after
// the step has run for a second and stays silent when the output is a file
// or a pipe; tests and library callers pass None (or nil, which Of turns
// into None).
package progress
