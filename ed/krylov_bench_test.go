package ed

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"os/exec"
	"testing"
	"time"

	"frustum/cluster"
	"frustum/ed/hilbert"
	"frustum/ed/lanczos"
)

// The ground state of the 24-site periodic Heisenberg ring in its S^z = 0
// sector (2704156 states), to a relative residual of 1e-10 on both sides,
// by our route (sector basis, compact CSR matrix, thick-restart Lanczos;
// all of it timed) and by scipy.sparse.linalg.eigsh (ARPACK, Debian's
// python3-scipy) on the same sector matrix built by numpy in the same run
// (testdata/eigsh_ring.py; only its eigsh call is timed). The two ground
// state energies must agree to 1e-10. Reports both times and their ratio;
// skipped without scipy.
func BenchmarkLanczosRing24Sz0AgainstScipy(b *testing.B) {
	// eigsh's tol bounds ||A x - lambda x|| / |lambda|, ours ||H y - theta
	// y|| / max(1, |theta|): the same test for |E0| > 1.
	const tol = 1e-10
	py := ""
	for _, p := range []string{"/usr/bin/python3", "python3"} {
		if exec.Command(p, "-c", "import scipy.sparse.linalg").Run() == nil {
			py = p
			break
		}
	}
	if py == "" {
		b.Skip("no python3 with scipy")
	}
	out, err := exec.Command(py, "testdata/eigsh_ring.py", "24", fmt.Sprint(tol)).Output()
	if err != nil {
		b.Fatal(err)
	}
	var sc struct {
		Dimension    int     `json:"dimension"`
		E0           float64 `json:"e0"`
		EigshSeconds float64 `json:"eigsh_seconds"`
	}
	if err := json.Unmarshal(out, &sc); err != nil {
		b.Fatal(err)
	}
	m, err := cluster.Ring(24, cluster.ChainParams{J1: 1})
	if err != nil {
		b.Fatal(err)
	}
	st := newSetup(m, [3]float64{0, 0, 1}, false)
	h := toHilbert(st.sys, st.h0)
	trivial, err := hilbert.NewGroup(st.sys.twoS, nil, false)
	if err != nil {
		b.Fatal(err)
	}
	var ours time.Duration
	var mv int
	for b.Loop() {
		t0 := time.Now()
		sec, err := hilbert.NewSector(h, 0, trivial, trivial.Irreps()[0], hilbert.SectorOptions{})
		if err != nil {
			b.Fatal(err)
		}
		csr, err := sec.MatrixReal(context.Background())
		if err != nil {
			b.Fatal(err)
		}
		r, err := lanczos.Lowest[float64](context.Background(), csr, lanczos.Options[float64]{K: 1, Tol: tol})
		ours = time.Since(t0)
		if err != nil || !r.Converged || sec.Dim() != sc.Dimension || math.Abs(r.Values[0]-sc.E0) > 1e-10 {
			b.Fatalf("dim %d (scipy %d), E0 %v (scipy %v), converged %v, %v", sec.Dim(), sc.Dimension, r.Values[0], sc.E0, r.Converged, err)
		}
		mv = r.Matvecs
	}
	b.ReportMetric(sc.EigshSeconds, "scipy-s")
	b.ReportMetric(ours.Seconds(), "ours-s")
	b.ReportMetric(sc.EigshSeconds/ours.Seconds(), "speedup")
	b.ReportMetric(float64(mv), "matvecs")
}
