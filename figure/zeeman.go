package figure

import (
	"fmt"
	"image/color"
	"math"
	"slices"
	"sort"

	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	frustumv1 "frustum/proto/frustum/v1"
)

// ZeemanData are spectra of one cluster at increasing field magnitudes
// along one direction: Spectra[i] at Field[i] (T).
type ZeemanData struct {
	// Field: the field magnitudes in T, strictly increasing (negative
	// values point against the direction).
	Field []float64
	// Spectra: one per field, each with its levels grouped as package tasks
	// returns them, ascending in energy. The S^z of a level that also
	// carries a total spin S is taken along the field vector, as the engine
	// gives it for SU(2)-invariant clusters (it turns the quantization axis
	// onto the field), and so counts with the opposite sign at negative
	// Field; the S^z of other levels is taken along z at every field.
	Spectra []*frustumv1.SpectrumResult
	// Lowest is how many levels to draw: every level that is among the
	// Lowest lowest at some field. 0 or less draws them all.
	Lowest int
}

// Validate returns a *DataError naming the field ("field",
// "spectra[2].levels", ...) when d cannot be drawn: no fields, a count of
// spectra that differs from that of fields, fields that do not increase, a
// spectrum without levels or an energy that is not finite.
func (d ZeemanData) Validate() error {
	if len(d.Field) == 0 {
		return dataErrorf("field", "empty: give at least one field")
	}
	if len(d.Spectra) != len(d.Field) {
		return dataErrorf("spectra", "has %d spectra for %d fields", len(d.Spectra), len(d.Field))
	}
	if err := checkFinite("field", d.Field); err != nil {
		return err
	}
	for i := 1; i < len(d.Field); i++ {
		if !(d.Field[i] > d.Field[i-1]) {
			return dataErrorf(fmt.Sprintf("field[%d]", i), "%v T does not exceed field[%d] = %v T: the fields must increase", d.Field[i], i-1, d.Field[i-1])
		}
	}
	for i, s := range d.Spectra {
		if s == nil {
			return dataErrorf(fmt.Sprintf("spectra[%d]", i), "missing")
		}
		if len(s.GetLevels()) == 0 {
			return dataErrorf(fmt.Sprintf("spectra[%d].levels", i), "empty")
		}
		for j, l := range s.GetLevels() {
			if e := l.GetEnergy(); math.IsNaN(e) || math.IsInf(e, 0) {
				return dataErrorf(fmt.Sprintf("spectra[%d].levels[%d].energy", i, j), "is %v; only finite numbers can be drawn", e)
			}
			if j > 0 && l.GetEnergy() < s.GetLevels()[j-1].GetEnergy() {
				return dataErrorf(fmt.Sprintf("spectra[%d].levels[%d].energy", i, j), "is below the level before it: levels must ascend")
			}
		}
	}
	return nil
}

// branchKey names one level across fields: its quantum numbers (twice S^z
// and twice S, where known) and its rank n among the levels that share
// them, counted from the lowest. Without quantum numbers n is the rank of
// a state among all states, counted with multiplicity.
type branchKey struct {
	hasSz bool
	twoSz int
	hasS  bool
	twoS  int
	n     int
}

// branchPoint is one level at one field.
type branchPoint struct {
	key    branchKey
	energy float64
	// rank among all levels at this field, counting the S^z components of
	// a zero-field multiplet one by one, highest S^z first (the order in
	// which a small field along the direction splits them); without
	// quantum numbers, the index of the level.
	rank int
}

// labelled reports whether every level carries S^z, or carries a total
// spin S whose degeneracy splits into 2S+1 S^z components (the zero-field
// levels of an SU(2)-invariant cluster). Levels then keep their identity
// across fields.
func (d ZeemanData) labelled() bool {
	for _, s := range d.Spectra {
		for _, l := range s.GetLevels() {
			if l.Sz != nil {
				continue
			}
			if l.TotalSpin == nil {
				return false
			}
			twoS := int(math.Round(2 * l.GetTotalSpin()))
			if twoS < 0 || l.GetDegeneracy()%int32(twoS+1) != 0 {
				return false
			}
		}
	}
	return true
}

// branches returns, per field, the levels with their keys, ascending in
// energy. In labelled data a level without S^z stands for its 2S+1
// components, highest S^z first.
func (d ZeemanData) branches() [][]branchPoint {
	labelled := d.labelled()
	out := make([][]branchPoint, len(d.Spectra))
	for i, s := range d.Spectra {
		seen := map[branchKey]int{}
		var pts []branchPoint
		states := 0 // the states below the current level
		for j, l := range s.GetLevels() {
			var keys []branchKey
			switch {
			case !labelled:
				// One branch per state, so that a degenerate level that
				// splits (at zero field, say) sends a branch along each
				// of its parts instead of shifting every rank above it.
				for k := range int(l.GetDegeneracy()) {
					keys = append(keys, branchKey{n: states + k})
				}
			case l.Sz != nil:
				k := branchKey{hasSz: true, twoSz: int(math.Round(2 * l.GetSz()))}
				if l.TotalSpin != nil {
					k.hasS, k.twoS = true, int(math.Round(2*l.GetTotalSpin()))
					if d.Field[i] < 0 {
						// S^z along the field, which points against the
						// direction here.
						k.twoSz = -k.twoSz
					}
				}
				keys = []branchKey{k}
			default:
				twoS := int(math.Round(2 * l.GetTotalSpin()))
				for t := twoS; t >= -twoS; t -= 2 {
					keys = append(keys, branchKey{hasSz: true, twoSz: t, hasS: true, twoS: twoS})
				}
			}
			for _, k := range keys {
				if labelled {
					k.n = seen[k]
					seen[k]++
				}
				rank := len(pts)
				if !labelled {
					rank = j
				}
				pts = append(pts, branchPoint{key: k, energy: l.GetEnergy(), rank: rank})
			}
			states += int(l.GetDegeneracy())
		}
		out[i] = pts
	}
	return out
}

// crossing is a ground-state level crossing at field B, where the ground
// energy is E.
type crossing struct{ B, E float64 }

// GroundCrossings returns the fields (T), ascending, at which the ground
// level of d changes its identity. With quantum numbers (every level
// carries S^z, or S at zero field) that is where the ground level's S^z or
// S changes: between two fields the crossing of the old and the new ground
// level is found by linear interpolation of their energy difference, which
// is exact for levels linear in the field; a ground level that is
// degenerate across the two identities exactly at a grid point gives that
// point. Without quantum numbers it is where the gap between the two
// lowest levels, a V-shaped |E_1 - E_0| near a crossing, falls to zero: the
// V through two grid points on one side reaches zero within the interval
// and meets the gap at the point on the other side (within a fifth of the
// gap's change over that interval), or the ground level's degeneracy rises
// at a grid point above that on both sides. An avoided crossing whose gap
// is much smaller than the gap's change over one grid step looks the same
// as a crossing at that resolution, and is reported as one.
//
// Data that do not validate (see Validate) have no crossings: nil.
func GroundCrossings(d ZeemanData) []float64 {
	var out []float64
	for _, c := range d.crossings() {
		out = append(out, c.B)
	}
	return out
}

func (d ZeemanData) crossings() []crossing {
	if d.Validate() != nil || len(d.Field) < 2 {
		return nil
	}
	var cs []crossing
	if d.labelled() {
		cs = d.labelledCrossings()
	} else {
		cs = d.gapCrossings()
	}
	sort.Slice(cs, func(i, j int) bool { return cs[i].B < cs[j].B })
	// One crossing found from both sides of a grid point counts once.
	span := d.Field[len(d.Field)-1] - d.Field[0]
	var out []crossing
	for _, c := range cs {
		if len(out) > 0 && c.B-out[len(out)-1].B <= 1e-9*span {
			continue
		}
		out = append(out, c)
	}
	return out
}

// energyTolerance is the spread of energies treated as one level at a
// field, as the engine groups them (1e-9 of the scale, at least 1e-9 K),
// with room for rounding.
func energyTolerance(pts []branchPoint) float64 {
	scale := 1.0
	for _, p := range pts {
		scale = math.Max(scale, math.Abs(p.energy))
	}
	return 1e-8 * scale
}

func (d ZeemanData) labelledCrossings() []crossing {
	br := d.branches()
	energy := make([]map[branchKey]float64, len(br))
	ground := make([]map[branchKey]bool, len(br))
	for i, pts := range br {
		energy[i] = map[branchKey]float64{}
		ground[i] = map[branchKey]bool{}
		tol := energyTolerance(pts)
		for _, p := range pts {
			energy[i][p.key] = p.energy
			if p.energy <= pts[0].energy+tol {
				ground[i][p.key] = true
			}
		}
	}
	// Two labels name the same branch unless a quantum number that both
	// carry differs: at zero field an SU(2) level carries S and S^z, in a
	// field with unequal g values only S^z is left, and the Kramers
	// doublet that splits at B = 0 is not a crossing.
	compatible := func(a, b branchKey) bool {
		return a.n == b.n && (!a.hasSz || !b.hasSz || a.twoSz == b.twoSz) && (!a.hasS || !b.hasS || a.twoS == b.twoS)
	}
	disjoint := func(a, b map[branchKey]bool) bool {
		for k := range a {
			for l := range b {
				if compatible(k, l) {
					return false
				}
			}
		}
		return true
	}
	var cs []crossing
	B := d.Field
	for i := 1; i < len(br); i++ {
		if disjoint(ground[i-1], ground[i]) {
			// Of a degenerate ground level, the member that continues as
			// the lowest: a lowest at B[i], b lowest at B[i-1].
			a, b := lowestAt(ground[i-1], energy[i]), lowestAt(ground[i], energy[i-1])
			ea0, eb1 := energy[i-1][a], energy[i][b]
			eb0, okB := energy[i-1][b]
			ea1, okA := energy[i][a]
			if okA && okB {
				d0, d1 := eb0-ea0, eb1-ea1 // d0 > 0 > d1
				f := d0 / (d0 - d1)
				cs = append(cs, crossing{B: B[i-1] + f*(B[i]-B[i-1]), E: ea0 + f*(ea1-ea0)})
			} else {
				// One of the two is not in the data on both sides: the
				// middle of the interval is all we know.
				e0, e1 := br[i-1][0].energy, br[i][0].energy
				cs = append(cs, crossing{B: (B[i-1] + B[i]) / 2, E: (e0 + e1) / 2})
			}
		}
		// Degenerate exactly at a grid point: the identities before and
		// after meet in the ground level at B[i].
		if i+1 < len(br) && len(ground[i]) > 1 && !disjoint(ground[i-1], ground[i]) &&
			!disjoint(ground[i], ground[i+1]) && disjoint(ground[i-1], ground[i+1]) {
			cs = append(cs, crossing{B: B[i], E: br[i][0].energy})
		}
	}
	return cs
}

// lowestAt returns the key of set with the lowest energy in e (keys absent
// from e count as highest), ties broken by keyLess so that the choice does
// not depend on map order.
func lowestAt(set map[branchKey]bool, e map[branchKey]float64) branchKey {
	var keys []branchKey
	for k := range set {
		keys = append(keys, k)
	}
	energy := func(k branchKey) float64 {
		if v, ok := e[k]; ok {
			return v
		}
		return math.Inf(1)
	}
	sort.Slice(keys, func(i, j int) bool {
		if ei, ej := energy(keys[i]), energy(keys[j]); ei != ej {
			return ei < ej
		}
		return keyLess(keys[i], keys[j])
	})
	return keys[0]
}

func keyLess(a, b branchKey) bool {
	switch {
	case a.twoSz != b.twoSz:
		return a.twoSz > b.twoSz
	case a.twoS != b.twoS:
		return a.twoS < b.twoS
	}
	return a.n < b.n
}

func (d ZeemanData) gapCrossings() []crossing {
	n := len(d.Field)
	B := d.Field
	gap := make([]float64, n)
	e0 := make([]float64, n)
	deg0 := make([]int32, n)
	tol := 0.0
	for i, s := range d.Spectra {
		lv := s.GetLevels()
		e0[i], deg0[i] = lv[0].GetEnergy(), lv[0].GetDegeneracy()
		gap[i] = math.NaN()
		if len(lv) > 1 {
			gap[i] = lv[1].GetEnergy() - lv[0].GetEnergy()
		}
		for _, l := range lv {
			tol = math.Max(tol, math.Abs(l.GetEnergy()))
		}
	}
	tol = 1e-8 * math.Max(tol, 1)
	ok := func(i int) bool { return i >= 0 && i < n && !math.IsNaN(gap[i]) }
	var cs []crossing
	for i := 0; i+1 < n; i++ {
		// A V with its vertex in [B[i], B[i+1]]: extrapolated from the two
		// points on its left ...
		if ok(i-1) && ok(i) && ok(i+1) && gap[i-1] > gap[i] {
			s := (gap[i-1] - gap[i]) / (B[i] - B[i-1])
			bc := B[i] + gap[i]/s
			if bc <= B[i+1] && math.Abs(s*(B[i+1]-bc)-gap[i+1]) <= 0.2*s*(B[i+1]-B[i])+tol {
				slope := (e0[i] - e0[i-1]) / (B[i] - B[i-1])
				cs = append(cs, crossing{B: bc, E: e0[i] + slope*(bc-B[i])})
				continue
			}
		}
		// ... or from the two on its right.
		if ok(i) && ok(i+1) && ok(i+2) && gap[i+2] > gap[i+1] {
			s := (gap[i+2] - gap[i+1]) / (B[i+2] - B[i+1])
			bc := B[i+1] - gap[i+1]/s
			if bc >= B[i] && math.Abs(s*(bc-B[i])-gap[i]) <= 0.2*s*(B[i+1]-B[i])+tol {
				slope := (e0[i+2] - e0[i+1]) / (B[i+2] - B[i+1])
				cs = append(cs, crossing{B: bc, E: e0[i+1] + slope*(bc-B[i+1])})
			}
		}
	}
	// Degenerate exactly at a grid point: the two levels are grouped into
	// one of higher degeneracy there.
	for i := 1; i+1 < n; i++ {
		if deg0[i] > deg0[i-1] && deg0[i] > deg0[i+1] {
			cs = append(cs, crossing{B: B[i], E: e0[i]})
		}
	}
	return cs
}

// Zeeman draws the level diagram of d: the energies (K, absolute, not
// shifted to the ground state) of the lowest d.Lowest levels against the
// field (T), each level followed across fields by its quantum numbers and
// coloured by its S^z where the levels carry it. Ground-state crossings
// (see GroundCrossings) are marked on the ground level, with a dotted
// vertical line at each.
func Zeeman(d ZeemanData) (*Figure, error) {
	if err := d.Validate(); err != nil {
		return nil, err
	}
	br := d.branches()
	labelled := d.labelled()

	// The branches drawn: those among the lowest levels at some field.
	chosen := map[branchKey]bool{}
	ymin, ymax := math.Inf(1), math.Inf(-1)
	for _, pts := range br {
		for _, p := range pts {
			if d.Lowest > 0 && p.rank >= d.Lowest {
				continue
			}
			chosen[p.key] = true
			ymin, ymax = math.Min(ymin, p.energy), math.Max(ymax, p.energy)
		}
	}
	keys := make([]branchKey, 0, len(chosen))
	for k := range chosen {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool { return keyLess(keys[i], keys[j]) })
	var szs []int // twice S^z, high to low
	for _, k := range keys {
		if k.hasSz && !slices.Contains(szs, k.twoSz) {
			szs = append(szs, k.twoSz)
		}
	}
	slices.Sort(szs)
	slices.Reverse(szs)

	p := newPlot()
	p.X.Label.Text = "B (T)"
	p.Y.Label.Text = "E (K)"
	leg := newLegend()
	// Curves of each branch, across the fields where it is present.
	for _, k := range keys {
		var pts plotter.XYs
		for i, fieldPts := range br {
			for _, q := range fieldPts {
				if q.key == k {
					pts = append(pts, plotter.XY{X: d.Field[i], Y: q.energy})
					break
				}
			}
		}
		col := color0(labelled, k, szs)
		ps, _, err := curve(pts, col, solid, 1.2)
		if err != nil {
			return nil, err
		}
		p.Add(ps...)
	}
	if labelled {
		for j, t := range szs {
			addEntry(&leg, "S_z = "+half(float64(t)/2), lineThumb(gradient(len(szs)-1-j, len(szs)), solid, 1.6))
		}
	}

	pad := 0.05 * (ymax - ymin)
	if pad == 0 {
		pad = 1
	}
	p.Y.Min, p.Y.Max = ymin-pad, ymax+pad

	cs := d.crossings()
	if len(cs) > 0 {
		vstyle := draw.LineStyle{Color: grey, Width: vg.Points(0.8), Dashes: dotted}
		var marks plotter.XYs
		var labels []string
		for _, c := range cs {
			p.Add(vline{x: c.B, style: vstyle})
			marks = append(marks, plotter.XY{X: c.B, Y: c.E})
			labels = append(labels, num(c.B)+" T")
		}
		sc, err := plotter.NewScatter(marks)
		if err != nil {
			return nil, err
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: black, Radius: vg.Points(3.2), Shape: draw.RingGlyph{}}
		p.Add(sc)
		// The fields are written at the foot of the dotted lines, below
		// the ground level, where no level runs.
		p.Y.Min = ymin - 2.5*pad
		foot := make(plotter.XYs, len(marks))
		for i, m := range marks {
			foot[i] = plotter.XY{X: m.X, Y: p.Y.Min}
		}
		lab, err := plotter.NewLabels(plotter.XYLabels{XYs: foot, Labels: labels})
		if err != nil {
			return nil, err
		}
		for i := range lab.TextStyle {
			lab.TextStyle[i].Font = fontOf(8)
			lab.TextStyle[i].XAlign = draw.XLeft
			lab.TextStyle[i].YAlign = draw.YBottom
		}
		lab.Offset = vg.Point{X: vg.Points(2.5), Y: vg.Points(2)}
		p.Add(lab)
		addEntry(&leg, "ground-state crossing", glyphThumb(sc.GlyphStyle))
	}
	p.Y.Max = ymax + pad

	name := d.Spectra[0].GetClusterName()
	title := fmt.Sprintf("Zeeman diagram of %q", name)
	if dir := direction(d); dir != nil {
		title += "\nfield along " + vector(dir)
	}
	if d.Lowest > 0 {
		title += fmt.Sprintf(", lowest %d levels", d.Lowest)
	}
	if !labelled {
		title += " (no S_z labels: levels by rank)"
	}
	return &Figure{Title: title, Panels: []Panel{{Plot: p, Legend: &leg}}, Width: 16, Height: 12}, nil
}

// color0 is the colour of a branch: by S^z where known, dark grey otherwise.
func color0(labelled bool, k branchKey, szs []int) color.Color {
	if !labelled || !k.hasSz {
		return grey
	}
	j := slices.Index(szs, k.twoSz)
	return gradient(len(szs)-1-j, len(szs))
}

// direction is the unit field direction of the spectra: that of the first
// non-zero field, flipped when that field is negative.
func direction(d ZeemanData) []float64 {
	for i, s := range d.Spectra {
		f := s.GetField()
		if len(f) != 3 || d.Field[i] == 0 {
			continue
		}
		norm := math.Sqrt(f[0]*f[0] + f[1]*f[1] + f[2]*f[2])
		if norm == 0 {
			continue
		}
		sign := 1.0
		if d.Field[i] < 0 {
			sign = -1
		}
		return []float64{sign * f[0] / norm, sign * f[1] / norm, sign * f[2] / norm}
	}
	return nil
}
