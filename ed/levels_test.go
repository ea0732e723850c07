package ed

import "testing"

// TestSU2LevelsOrder checks su2Levels' order on multiplets whose energies
// chain within the tolerance (0, 0.6 tol, 1.2 tol; common practice, no
// source): energy runs are cut at tol from each run's first level, and
// inside a run the levels go by S, then S^z. The first run is {S = 2 at 0,
// S = 1/2 at 0.6 tol}, the second {S = 0 at 1.2 tol}.
func TestSU2LevelsOrder(t *testing.T) {
	const tol = 1e-9
	ms := []multiplet{{e: 1.2 * tol, twoS: 0, count: 1}, {e: 0.6 * tol, twoS: 1, count: 1}, {e: 0, twoS: 4, count: 1}}
	got := su2Levels(ms, 0, tol)
	want := []float64{0.5, 2, 0}
	if len(got) != len(want) {
		t.Fatalf("%d levels, want %d", len(got), len(want))
	}
	for i, l := range got {
		if l.TotalSpin != want[i] {
			t.Errorf("level %d: S = %g, want %g (levels %+v)", i, l.TotalSpin, want[i], got)
		}
	}
	// In a field the S^z components of one multiplet spread beyond tol and
	// come out by energy.
	got = su2Levels([]multiplet{{e: 0, twoS: 2, count: 1}}, 1, tol)
	for i := 1; i < len(got); i++ {
		if got[i].Energy < got[i-1].Energy {
			t.Errorf("field: levels not ascending: %+v", got)
		}
	}
}
