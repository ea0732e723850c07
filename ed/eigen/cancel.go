package eigen

import (
	"context"
	"errors"
	"sync/atomic"
)

// ErrNoConvergence is returned (wrapped) by SymmetricContext and
// HermitianContext when the tridiagonal iteration does not converge, or the
// matrix has a non-finite entry: the cases in which Symmetric and Hermitian
// report ok = false.
var ErrNoConvergence = errors.New("eigen: no convergence")

// errStopped is returned by the internal stages when their stopper fired;
// the exported functions turn it into ctx.Err().
var errStopped = errors.New("eigen: stopped")

// A stopper is the cancellation flag the stages poll. It is set once, by
// context.AfterFunc, when the caller's context is done, so a poll is one
// atomic load of a cache line that is only ever written once (no channel
// operation, no lock). A nil *stopper never fires: it stands for a context
// that cannot be cancelled (context.Background), and then a poll is a nil
// compare.
type stopper struct {
	flag atomic.Bool
}

// stopped reports whether the work should stop. It is safe to call from any
// goroutine.
func (s *stopper) stopped() bool {
	if probeEnabled {
		probe()
	}
	return s != nil && s.flag.Load()
}

// watch returns the stopper for ctx and the function that releases it (to be
// called, once, when the work is over). For a context that is never done
// (ctx.Done() == nil) the stopper is nil and nothing is started.
func watch(ctx context.Context) (*stopper, func() bool) {
	if ctx.Done() == nil {
		return nil, func() bool { return true }
	}
	s := new(stopper)
	return s, context.AfterFunc(ctx, func() { s.flag.Store(true) })
}

// pollRows is how many rows of a large kernel (a matrix-vector product, a
// rank-2k update, a block of reflectors or of rotations applied to a tile)
// run between two polls of the stopper inside it.
const pollRows = 16
