package parallel

import (
	"runtime"
	"sync"
	"sync/atomic"
)

// Ranges splits [0, n) into one contiguous range per core and runs work on
// each, for jobs whose every index costs about the same. Jobs of fewer than
// 2·minChunk indices run on the calling goroutine, where starting
// goroutines would cost more than they save.
func Ranges(n, minChunk int, work func(lo, hi int)) {
	workers := min(runtime.GOMAXPROCS(0), n/max(minChunk, 1))
	if workers < 2 {
		work(0, n)
		return
	}
	var wg sync.WaitGroup
	chunk := (n + workers - 1) / workers
	for lo := 0; lo < n; lo += chunk {
		hi := min(lo+chunk, n)
		wg.Add(1)
		go func() {
			defer wg.Done()
			work(lo, hi)
		}()
	}
	wg.Wait()
}

// Blocks runs work over [0, n) in blocks of block indices (the last one
// shorter), handed out in order to whichever worker is free, on up to one
// worker per core. Each worker first makes its own scratch with newScratch
// and passes it to every block it runs; Blocks returns the scratches, one
// per worker, so that counters kept in them can be summed (in any order,
// for integers). With a single block, or a single core, everything runs on
// the calling goroutine.
func Blocks[S any](n, block int, newScratch func() S, work func(scratch S, lo, hi int)) []S {
	return BlocksUpTo(n, block, runtime.GOMAXPROCS(0), newScratch, work)
}

// BlocksUpTo is Blocks on at most workers workers (and never more than one
// per core), for jobs whose scratch is so large that the number of copies
// alive at once must be bounded whatever the machine.
func BlocksUpTo[S any](n, block, workers int, newScratch func() S, work func(scratch S, lo, hi int)) []S {
	block = max(block, 1)
	blocks := (n + block - 1) / block
	workers = min(workers, runtime.GOMAXPROCS(0), blocks)
	if workers < 2 {
		s := newScratch()
		for lo := 0; lo < n; lo += block {
			work(s, lo, min(lo+block, n))
		}
		return []S{s}
	}
	scratches := make([]S, workers)
	var next atomic.Int64
	var wg sync.WaitGroup
	for w := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			s := newScratch()
			for {
				b := int(next.Add(1) - 1)
				if b >= blocks {
					break
				}
				lo := b * block
				work(s, lo, min(lo+block, n))
			}
			scratches[w] = s
		}()
	}
	wg.Wait()
	return scratches
}
