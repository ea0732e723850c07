//go:build eigenprobe

package eigen

import (
	"fmt"
	"runtime"
	"sync"
	"time"
)

// probeEnabled is true with -tags eigenprobe: every poll of a stopper (and
// the entry to and return from SymmetricContext and HermitianContext) calls
// probe, which records the longest time between two consecutive polls and
// where they were. With GOMAXPROCS=1 all the work runs on one goroutine at a
// time, so that longest gap is the longest uninterruptible stretch of work.
const probeEnabled = true

var probeState struct {
	sync.Mutex
	last           time.Time
	lastPC         uintptr
	max            time.Duration
	maxFrom, maxTo uintptr
	polls          int
}

func probe() {
	now := time.Now()
	var pc [1]uintptr
	runtime.Callers(3, pc[:]) // the caller of stopped (or of the API function)
	p := &probeState
	p.Lock()
	defer p.Unlock()
	p.polls++
	if !p.last.IsZero() {
		if g := now.Sub(p.last); g > p.max {
			p.max, p.maxFrom, p.maxTo = g, p.lastPC, pc[0]
		}
	}
	p.last, p.lastPC = now, pc[0]
}

// probeReset clears the record.
func probeReset() {
	p := &probeState
	p.Lock()
	defer p.Unlock()
	p.last, p.lastPC, p.max, p.maxFrom, p.maxTo, p.polls = time.Time{}, 0, 0, 0, 0, 0
}

// probeReport returns the longest gap and the two polls around it.
func probeReport() (time.Duration, string) {
	p := &probeState
	p.Lock()
	defer p.Unlock()
	where := func(pc uintptr) string {
		f := runtime.FuncForPC(pc)
		if f == nil {
			return "?"
		}
		file, line := f.FileLine(pc)
		for i := len(file) - 1; i >= 0; i-- {
			if file[i] == '/' {
				file = file[i+1:]
				break
			}
		}
		return fmt.Sprintf("%s:%d", file, line)
	}
	return p.max, fmt.Sprintf("from %s to %s (%d polls)", where(p.maxFrom), where(p.maxTo), p.polls)
}
