//go:build eigenprobe

package eigen

import (
	"context"
	"os"
	"runtime"
	"strconv"
	"strings"
	"testing"
	"time"
)

// TestProbeLongestStretch times (for PureGo: LAPACK is not polled inside), for the orders in EIGEN_PROBE_N (default
// 1000), the longest stretch between two polls of the stopper in each solver
// path, entry and return included. Run it on one core, where that stretch is
// the longest time a cancellation can go unnoticed:
//
//	GOMAXPROCS=1 EIGEN_PROBE_N=4000 go test -tags eigenprobe -run Probe -v ./ed/eigen/
func TestProbeLongestStretch(t *testing.T) {
	spec := os.Getenv("EIGEN_PROBE_N")
	if spec == "" {
		spec = "1000"
	}
	for _, f := range strings.Split(spec, ",") {
		n, err := strconv.Atoi(f)
		if err != nil {
			t.Fatal(err)
		}
		for _, vectors := range []bool{true, false} {
			probeReset()
			t0 := time.Now()
			if _, _, err := PureGo.Symmetric(context.Background(), randSym(n, 1), n, Job{Vectors: vectors}, nil); err != nil {
				t.Fatal("not ok")
			}
			g, where := probeReport()
			t.Logf("GOMAXPROCS=%d real n=%d vectors=%v: %v in all, longest stretch %v %s", runtime.GOMAXPROCS(0), n, vectors, time.Since(t0).Round(time.Millisecond), g.Round(10*time.Microsecond), where)
			probeReset()
			t0 = time.Now()
			if _, _, err := PureGo.Hermitian(context.Background(), randHerm(n, 1), n, Job{Vectors: vectors}, nil); err != nil {
				t.Fatal("not ok")
			}
			g, where = probeReport()
			t.Logf("GOMAXPROCS=%d complex n=%d vectors=%v: %v in all, longest stretch %v %s", runtime.GOMAXPROCS(0), n, vectors, time.Since(t0).Round(time.Millisecond), g.Round(10*time.Microsecond), where)
		}
	}
}
