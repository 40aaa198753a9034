// Package parallel spreads loops over the cores, in the two shapes ferry
// needs: even contiguous ranges for work whose every index costs about the
// same (Ranges), and blocks handed out on demand, each worker with its own
// scratch space, for work whose cost varies from index to index (Blocks).
//
// Neither shape decides a result: each index is worked on exactly once, and
// a caller that writes index i's result only from index i's input gets the
// same output on any number of cores. Sums across indices belong after the
// loop, in index order, never in the workers.
package parallel
