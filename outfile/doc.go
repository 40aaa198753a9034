// Package outfile writes output files whole or not at all.
//
// Every output of ferry goes to a temporary file in the folder of its final
// name and is renamed into place only once it is complete and synced, so a
// failed or interrupted run leaves an earlier output exactly as it was and no
// half-written file behind. It also refuses to write over one of the run's own
// inputs.
package outfile
