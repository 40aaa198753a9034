package parallel

import (
	"runtime"
	"sync/atomic"
	"testing"
)

// Every index is visited exactly once, whatever the sizes and the number of
// cores, in both shapes.
func TestEveryIndexOnce(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, procs := range []int{1, 2, 7} {
		runtime.GOMAXPROCS(procs)
		for _, n := range []int{0, 1, 5, 64, 1000, 1001} {
			for _, chunk := range []int{0, 1, 3, 64, 2000} {
				seen := make([]int32, n)
				Ranges(n, chunk, func(lo, hi int) {
					for i := lo; i < hi; i++ {
						atomic.AddInt32(&seen[i], 1)
					}
				})
				check(t, "Ranges", procs, n, chunk, seen)

				seen = make([]int32, n)
				type scratch struct{ visited int }
				ss := Blocks(n, chunk, func() *scratch { return new(scratch) }, func(s *scratch, lo, hi int) {
					if hi-lo > max(chunk, 1) || lo >= hi {
						t.Errorf("Blocks(%d, %d): block [%d, %d)", n, chunk, lo, hi)
					}
					for i := lo; i < hi; i++ {
						atomic.AddInt32(&seen[i], 1)
						s.visited++
					}
				})
				check(t, "Blocks", procs, n, chunk, seen)
				total := 0
				for _, s := range ss {
					total += s.visited
				}
				if total != n || len(ss) == 0 || len(ss) > max(procs, 1) {
					t.Errorf("Blocks(%d, %d) on %d cores: %d scratches counting %d indices", n, chunk, procs, len(ss), total)
				}
			}
		}
	}
}

func check(t *testing.T, shape string, procs, n, chunk int, seen []int32) {
	t.Helper()
	for i, c := range seen {
		if c != 1 {
			t.Fatalf("%s(%d, %d) on %d cores: index %d visited %d times", shape, n, chunk, procs, i, c)
		}
	}
}

// BlocksUpTo never runs more workers than it is allowed, and still visits
// every index once.
func TestBlocksUpToBound(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	runtime.GOMAXPROCS(7)
	for _, limit := range []int{1, 2, 3} {
		var live, most atomic.Int32
		seen := make([]int32, 50)
		ss := BlocksUpTo(len(seen), 1, limit, func() int { return 0 }, func(_ int, lo, hi int) {
			now := live.Add(1)
			for {
				m := most.Load()
				if now <= m || most.CompareAndSwap(m, now) {
					break
				}
			}
			for i := lo; i < hi; i++ {
				atomic.AddInt32(&seen[i], 1)
			}
			live.Add(-1)
		})
		check(t, "BlocksUpTo", 7, len(seen), 1, seen)
		if len(ss) > limit || int(most.Load()) > limit {
			t.Errorf("BlocksUpTo(…, %d, …): %d scratches, %d blocks at once", limit, len(ss), most.Load())
		}
	}
}
