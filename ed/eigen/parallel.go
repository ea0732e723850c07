package eigen

import (
	"math"
	"runtime"
	"sync"
)

// parallelMinWork is the amount of work (in inner-loop element updates)
// below which a step runs on the calling goroutine only: a goroutine
// hand-off costs about a microsecond, a few thousand element updates.
const parallelMinWork = 1 << 17

// parallelWorkers returns how many goroutines a step of the given work uses.
func parallelWorkers(work int) int {
	if work < parallelMinWork {
		return 1
	}
	return max(1, min(runtime.GOMAXPROCS(0), work/parallelMinWork))
}

// parallelFor runs fn(0), ..., fn(w-1) concurrently, fn(0) on the caller.
func parallelFor(w int, fn func(t int)) {
	if w <= 1 {
		fn(0)
		return
	}
	var wg sync.WaitGroup
	wg.Add(w - 1)
	for t := 1; t < w; t++ {
		go func() {
			defer wg.Done()
			fn(t)
		}()
	}
	fn(0)
	wg.Wait()
}

// triSplit splits the rows 0..k-1 of a lower triangle (row i has i+1
// elements) into w ranges [b[t], b[t+1]) of about equal area: b[t] =
// k sqrt(t/w).
func triSplit(k, w int) []int {
	b := make([]int, w+1)
	for t := 1; t < w; t++ {
		b[t] = int(float64(k) * math.Sqrt(float64(t)/float64(w)))
	}
	b[w] = k
	for t := 1; t <= w; t++ {
		b[t] = max(b[t], b[t-1])
	}
	return b
}
