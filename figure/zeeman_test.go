package figure

import (
	"context"
	"fmt"
	"math"
	"slices"
	"testing"

	"google.golang.org/protobuf/proto"

	"frustum/cluster"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

func TestMuBOverKB(t *testing.T) {
	if muBOverKB != ed.MuBOverKB {
		t.Errorf("muBOverKB = %v, ed.MuBOverKB = %v", muBOverKB, ed.MuBOverKB)
	}
}

// heisenberg is a cluster of the given spins, g = 2, with exchange J (K) on
// the bonds.
func heisenberg(name string, spins []float64, bonds [][2]int, J float64) *frustumv1.Cluster {
	c := &frustumv1.Cluster{Name: name}
	for i, s := range spins {
		c.Sites = append(c.Sites, &frustumv1.Site{Label: fmt.Sprintf("s%d", i), Spin: proto.Float64(s), G: proto.Float64(2)})
	}
	for _, b := range bonds {
		c.Bonds = append(c.Bonds, &frustumv1.Bond{A: c.Sites[b[0]].Label, B: c.Sites[b[1]].Label, Exchange: proto.Float64(J)})
	}
	return c
}

// sweep computes the spectra of c at the fields (T) along dir with
// tasks.Spectrum, as frustum plot zeeman does.
func sweep(t *testing.T, c *frustumv1.Cluster, dir [3]float64, fields []float64, lowest int) ZeemanData {
	t.Helper()
	d := ZeemanData{Field: fields, Lowest: lowest}
	for _, B := range fields {
		p := &frustumv1.SpectrumParameters{Field: []float64{B * dir[0], B * dir[1], B * dir[2]}}
		s, err := tasks.Spectrum(context.Background(), c, p, ed.Options{})
		if err != nil {
			t.Fatalf("spectrum at %g T: %v", B, err)
		}
		d.Spectra = append(d.Spectra, s)
	}
	return d
}

// withoutLabels returns d with the quantum numbers taken off the levels and
// levels closer than the engine's grouping tolerance merged, as the engine
// reports a cluster without conserved quantities.
func withoutLabels(d ZeemanData) ZeemanData {
	out := d
	out.Spectra = nil
	for _, s := range d.Spectra {
		scale := 1.0
		for _, l := range s.GetLevels() {
			scale = math.Max(scale, math.Abs(l.GetEnergy()))
		}
		ns := &frustumv1.SpectrumResult{ClusterName: s.GetClusterName(), Field: s.GetField()}
		var sum float64
		for _, l := range s.GetLevels() {
			n := len(ns.Levels)
			if n > 0 && l.GetEnergy()-ns.Levels[n-1].GetEnergy() <= 1e-9*scale {
				last := ns.Levels[n-1]
				sum += l.GetEnergy() * float64(l.GetDegeneracy())
				last.Degeneracy += l.GetDegeneracy()
				last.Energy = sum / float64(last.Degeneracy)
				continue
			}
			sum = l.GetEnergy() * float64(l.GetDegeneracy())
			ns.Levels = append(ns.Levels, &frustumv1.Level{Energy: l.GetEnergy(), Degeneracy: l.GetDegeneracy()})
		}
		out.Spectra = append(out.Spectra, ns)
	}
	return out
}

// checkCrossings compares GroundCrossings of d with want (T), with and
// without quantum numbers.
func checkCrossings(t *testing.T, what string, d ZeemanData, want []float64, tol float64) {
	t.Helper()
	for _, form := range []struct {
		name string
		data ZeemanData
	}{{"with quantum numbers", d}, {"without quantum numbers", withoutLabels(d)}} {
		got := GroundCrossings(form.data)
		if len(got) != len(want) {
			t.Errorf("%s, %s: crossings at %v T, want %v T", what, form.name, got, want)
			continue
		}
		for i := range want {
			if math.Abs(got[i]-want[i]) > tol {
				t.Errorf("%s, %s: crossing %d at %.9f T, want %.9f T (tolerance %g T)", what, form.name, i, got[i], want[i], tol)
			}
		}
	}
	if !d.labelled() {
		t.Errorf("%s: the engine's levels are not taken as labelled", what)
	}
	if withoutLabels(d).labelled() {
		t.Errorf("%s: levels without quantum numbers are taken as labelled", what)
	}
}

// Closed forms (EXACT, PHYSICS.md), H = J sum S_i.S_j - g mu_B B S^z with g = 2:
//   - dimer (textbook): singlet -3J/4, triplet J/4 - g mu_B B S^z; the
//     S^z = 1 level crosses the singlet at g mu_B B = J.
//   - spin-1/2 triangle (Kambe spectrum, E(S) = (J/2)[S(S+1) - 9/4]):
//     doublets -3J/4, quartet 3J/4; the S^z = 3/2 level crosses the
//     S^z = 1/2 doublets at g mu_B B = 3J/2.
//   - star, centre s0 = 1 and n = 3 outer spins 1/2 (Kambe; Richter and
//     Voigt, J. Phys. A 27, 1139 (1994)): the T = 0 magnetization steps at
//     g mu_B B = J(n/2 - s0 + k), k = 1, 2.
//
// The levels are linear in B and the interpolation is exact for them, so
// the tolerance is far below the brief's 1e-3 of the field span.

func TestGroundCrossingsDimer(t *testing.T) {
	m, err := cluster.LoadFile("../testdata/dimer.json")
	if err != nil {
		t.Fatal(err)
	}
	const J, g = 10.0, 2.0 // testdata/dimer.json
	want := J / (g * ed.MuBOverKB)
	d := sweep(t, m.ToProto(), [3]float64{0, 0, 1}, linspace(0, 15, 61), 4)
	checkCrossings(t, "dimer on 0:15:61", d, []float64{want}, 1e-6)

	// The crossing field on a grid point: the two levels are degenerate
	// there.
	fields := linspace(0, 2*want, 21)
	fields[10] = want
	checkCrossings(t, "dimer with the crossing on the grid", sweep(t, m.ToProto(), [3]float64{0, 0, 1}, fields, 0), []float64{want}, 1e-6)

	// Along another direction the SU(2) dimer crosses at the same field.
	checkCrossings(t, "dimer along (1,1,0)", sweep(t, m.ToProto(), [3]float64{1 / math.Sqrt2, 1 / math.Sqrt2, 0}, linspace(1, 13, 25), 0), []float64{want}, 1e-6)

	// A grid that stops short of the crossing has none.
	if got := GroundCrossings(sweep(t, m.ToProto(), [3]float64{0, 0, 1}, linspace(0, 7, 15), 0)); len(got) != 0 {
		t.Errorf("dimer on 0:7:15: crossings %v, want none below %g T", got, want)
	}
}

func TestGroundCrossingsTriangle(t *testing.T) {
	const J = 1.0
	tri := heisenberg("spin-1/2 triangle", []float64{0.5, 0.5, 0.5}, [][2]int{{0, 1}, {1, 2}, {2, 0}}, J)
	want := 1.5 * J / (2 * ed.MuBOverKB)
	d := sweep(t, tri, [3]float64{0, 0, 1}, linspace(0, 3, 31), 0)
	checkCrossings(t, "triangle on 0:3:31", d, []float64{want}, 1e-6)

	// A coarse grid with the crossing in its first interval, where the
	// ground level at 0 T is the fourfold S = 1/2 level: the S^z = +1/2
	// part is the one that meets the quartet.
	d = sweep(t, tri, [3]float64{0, 0, 1}, []float64{0, 2, 3}, 0)
	checkCrossings(t, "triangle on 0,2,3", d, []float64{want}, 1e-6)

	// Through zero field: at B = 0 the ground doublet turns from S^z =
	// -1/2 to +1/2 along the direction, a crossing too.
	d = sweep(t, tri, [3]float64{0, 0, 1}, linspace(-3, 3, 61), 0)
	checkCrossings(t, "triangle on -3:3:61", d, []float64{-want, 0, want}, 1e-6)
}

// Unequal g values: at zero field the levels carry S and S^z (SU(2)), in a
// field only S^z. The ground doublet splitting at B = 0 is no crossing, and
// the doublet-quartet crossing of the triangle stays where the effective
// moments put it (derivation: the lowest doublet and the quartet carry
// S^z and are linear in B with slopes set by their g averages; checked
// here against the crossing found on a fine grid).
func TestGroundCrossingsUnequalG(t *testing.T) {
	tri := heisenberg("triangle, unequal g", []float64{0.5, 0.5, 0.5}, [][2]int{{0, 1}, {1, 2}, {2, 0}}, 1)
	tri.Sites[1].G = proto.Float64(2.3)
	d := sweep(t, tri, [3]float64{0, 0, 1}, linspace(0, 0.5, 11), 0)
	if got := GroundCrossings(d); len(got) != 0 {
		t.Errorf("crossings %v below the quartet's field, want none", got)
	}
	fine := GroundCrossings(sweep(t, tri, [3]float64{0, 0, 1}, linspace(0, 3, 301), 0))
	coarse := GroundCrossings(sweep(t, tri, [3]float64{0, 0, 1}, linspace(0, 3, 31), 0))
	if len(fine) != 1 || len(coarse) != 1 || math.Abs(fine[0]-coarse[0]) > 1e-3 {
		t.Errorf("crossings fine %v, coarse %v: want one, the same", fine, coarse)
	}
}

func TestGroundCrossingsStar(t *testing.T) {
	const J, s0, n = 1.0, 1.0, 3.0
	star := heisenberg("star", []float64{s0, 0.5, 0.5, 0.5}, [][2]int{{0, 1}, {0, 2}, {0, 3}}, J)
	var want []float64
	for k := 1.0; k <= 2*s0; k++ {
		want = append(want, J*(n/2-s0+k)/(2*ed.MuBOverKB))
	}
	d := sweep(t, star, [3]float64{0, 0, 1}, linspace(0, 3, 41), 6)
	checkCrossings(t, "star on 0:3:41", d, want, 1e-6)
}

// TestGroundCrossingsDM checks a cluster whose levels carry S^z but not S:
// the triangle of testdata/triangle-dm.json (J = 100 K, D^z = 8 K, g =
// 2.1), doublets at -3J/4 +- (sqrt(3)/2) D^z and the quartet at 3J/4
// (PHYSICS.md, derivation); the lower doublet's S^z = 1/2 level meets the
// quartet's S^z = 3/2 level at g mu_B B = 3J/2 + (sqrt(3)/2) D^z.
func TestGroundCrossingsDM(t *testing.T) {
	m, err := cluster.LoadFile("../testdata/triangle-dm.json")
	if err != nil {
		t.Fatal(err)
	}
	const J, D, g = 100.0, 8.0, 2.1
	want := (1.5*J + math.Sqrt(3)/2*D) / (g * ed.MuBOverKB)
	d := sweep(t, m.ToProto(), [3]float64{0, 0, 1}, linspace(0, 150, 31), 4)
	for _, s := range d.Spectra {
		for _, l := range s.GetLevels() {
			if l.Sz == nil || l.TotalSpin != nil {
				t.Fatalf("the DM triangle's levels should carry S^z and not S: %v", l)
			}
		}
	}
	checkCrossings(t, "DM triangle on 0:150:31", d, []float64{want}, 1e-6)
}

// TestGroundCrossingsAvoided checks that an avoided crossing wider than the
// grid resolves is not reported: two levels without quantum numbers,
// E = -+ sqrt(Delta^2 + (h - h0)^2)/2 with h = 2 mu_B B.
func TestGroundCrossingsAvoided(t *testing.T) {
	level := func(e float64) *frustumv1.Level { return &frustumv1.Level{Energy: e, Degeneracy: 1} }
	build := func(delta float64) ZeemanData {
		d := ZeemanData{Field: linspace(0, 10, 41)}
		for _, B := range d.Field {
			x := 2*ed.MuBOverKB*B - 6
			r := math.Sqrt(delta*delta+x*x) / 2
			d.Spectra = append(d.Spectra, &frustumv1.SpectrumResult{Levels: []*frustumv1.Level{level(-r), level(r), level(20)}})
		}
		return d
	}
	if got := GroundCrossings(build(2)); len(got) != 0 {
		t.Errorf("avoided crossing with a gap of 2 K: crossings %v, want none", got)
	}
	// A true crossing of the same levels is found.
	want := 6 / (2 * ed.MuBOverKB)
	if got := GroundCrossings(build(0)); len(got) != 1 || math.Abs(got[0]-want) > 1e-9 {
		t.Errorf("crossing at %g T: GroundCrossings = %v", want, got)
	}
}

// TestZeemanFigure checks what the level diagram draws.
func TestZeemanFigure(t *testing.T) {
	tri := heisenberg("spin-1/2 triangle", []float64{0.5, 0.5, 0.5}, [][2]int{{0, 1}, {1, 2}, {2, 0}}, 1)
	d := sweep(t, tri, [3]float64{0, 0, 1}, linspace(0, 3, 31), 3)
	fig, err := Zeeman(d)
	if err != nil {
		t.Fatal(err)
	}
	p := fig.Panels[0].Plot
	if p.X.Label.Text != "B (T)" || p.Y.Label.Text != "E (K)" {
		t.Errorf("axes %q, %q", p.X.Label.Text, p.Y.Label.Text)
	}
	// The lowest 3 levels at some field: the two doublet components and,
	// from the crossing on, the quartet's S^z = 3/2 and 1/2 levels; the
	// branch keys say which are drawn.
	chosen := map[int]bool{}
	for _, pts := range d.branches() {
		for _, q := range pts {
			if q.rank < d.Lowest {
				chosen[q.key.twoSz] = true
			}
		}
	}
	var szs []int
	for k := range chosen {
		szs = append(szs, k)
	}
	slices.Sort(szs)
	if !slices.Equal(szs, []int{-1, 1, 3}) {
		t.Errorf("levels drawn have 2 S^z = %v, want -1, 1, 3", szs)
	}
	// The energy axis spans the levels drawn, not the whole spectrum.
	// At 3 T the ground level is the quartet's S^z = 3/2 at 3J/4 - 3h/2
	// = -5.30 K; the highest level drawn is the quartet at 3J/4 at 0 T.
	if p.Y.Max < 0.75 || p.Y.Max > 1.5 || p.Y.Min > -5.29 || p.Y.Min < -7 {
		t.Errorf("energy axis %g .. %g K", p.Y.Min, p.Y.Max)
	}
	checkFiles(t, fig, "triangle")
}
