package main

import (
	"encoding/csv"
	"fmt"
	"io"
	"maps"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"
	"unicode/utf8"

	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
)

// table is a text table whose columns are right-aligned under their headers
// (left-aligned with left set, for columns of words).
type table struct {
	header []string
	rows   [][]string
	left   bool
	// leftFirst left-aligns the first column only (names before numbers).
	leftFirst bool
}

func (t *table) add(cells ...string) { t.rows = append(t.rows, cells) }

func (t *table) write(w io.Writer) error {
	width := make([]int, len(t.header))
	for i, h := range t.header {
		width[i] = utf8.RuneCountInString(h)
	}
	for _, r := range t.rows {
		for i, c := range r {
			width[i] = max(width[i], utf8.RuneCountInString(c))
		}
	}
	var b strings.Builder
	line := func(cells []string) {
		if t.left {
			var l strings.Builder
			for i, c := range cells {
				if i > 0 {
					l.WriteString("  ")
				}
				l.WriteString(c)
				l.WriteString(strings.Repeat(" ", width[i]-utf8.RuneCountInString(c)))
			}
			b.WriteString(strings.TrimRight(l.String(), " "))
			b.WriteString("\n")
			return
		}
		b.WriteString(" ")
		for i, c := range cells {
			b.WriteString("  ")
			pad := strings.Repeat(" ", width[i]-utf8.RuneCountInString(c))
			if t.leftFirst && i == 0 {
				b.WriteString(c + pad)
				continue
			}
			b.WriteString(pad)
			b.WriteString(c)
		}
		b.WriteString("\n")
	}
	line(t.header)
	for _, r := range t.rows {
		line(r)
	}
	_, err := io.WriteString(w, b.String())
	return err
}

// fixed prints v with d decimals, without a minus sign on zero.
func fixed(v float64, d int) string {
	s := strconv.FormatFloat(v, 'f', d, 64)
	if strings.Trim(s, "-0.") == "" {
		s = strings.TrimPrefix(s, "-")
	}
	return s
}

// sig prints v with n significant digits.
func sig(v float64, n int) string {
	if v == 0 {
		return "0"
	}
	return strconv.FormatFloat(v, 'g', n, 64)
}

// num prints v in full precision for CSV.
func num(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// half prints a quantum number that is a multiple of 1/2: 0, 1, -1/2, 3/2.
func half(v float64) string {
	twice := math.Round(2 * v)
	if math.Abs(2*v-twice) > 1e-6 {
		return sig(v, 6)
	}
	if int64(twice)%2 == 0 {
		return strconv.FormatInt(int64(twice)/2, 10)
	}
	return strconv.FormatInt(int64(twice), 10) + "/2"
}

func vector(v []float64) string {
	parts := make([]string, len(v))
	for i, x := range v {
		parts[i] = sig(x, 6)
	}
	return "(" + strings.Join(parts, ", ") + ")"
}

// spectrumTable prints the levels and the engine report.
func spectrumTable(w io.Writer, r *frustumv1.SpectrumResult) error {
	what := fmt.Sprintf("all %d states", r.GetTotalStates())
	if r.GetTruncated() {
		what = fmt.Sprintf("lowest %d of %d states", len(r.GetEnergies()), r.GetTotalStates())
	}
	fmt.Fprintf(w, "Spectrum of %q at B = %s T: %s in %d levels\n\n", r.GetClusterName(), vector(r.GetField()), what, len(r.GetLevels()))
	header := []string{"level", "E (K)", "E - E0 (K)", "degeneracy", "Sz", "S"}
	res := levelResiduals(r)
	if res != nil {
		header = append(header, "residual (K)")
	}
	t := &table{header: header}
	e0 := 0.0
	if len(r.GetLevels()) > 0 {
		e0 = r.GetLevels()[0].GetEnergy()
	}
	for i, l := range r.GetLevels() {
		sz, s := "-", "-"
		if l.Sz != nil {
			sz = half(l.GetSz())
		}
		if l.TotalSpin != nil {
			s = half(l.GetTotalSpin())
		}
		row := []string{strconv.Itoa(i + 1), fixed(l.GetEnergy(), 4), fixed(l.GetEnergy()-e0, 4), strconv.Itoa(int(l.GetDegeneracy())), sz, s}
		if res != nil {
			row = append(row, sig(res[i], 2))
		}
		t.add(row...)
	}
	if err := t.write(w); err != nil {
		return err
	}
	fmt.Fprintln(w, `  Sz and S are shown where they are good quantum numbers ("-" where not).`)
	if res != nil {
		fmt.Fprintln(w, `  residual: the largest ||H y - E y|| of the level's Lanczos vectors.`)
	}
	if g := r.GetGroundState(); g != nil {
		if err := groundStateTable(w, g); err != nil {
			return err
		}
	}
	return report(w, r.GetEngine())
}

// levelResiduals returns, per level, the largest residual of its energies
// (the energies run through the levels in order), or nil without residuals.
func levelResiduals(r *frustumv1.SpectrumResult) []float64 {
	rs := r.GetResiduals()
	if len(rs) == 0 {
		return nil
	}
	out := make([]float64, len(r.GetLevels()))
	k := 0
	for i, l := range r.GetLevels() {
		for j := 0; j < int(l.GetDegeneracy()) && k < len(rs); j++ {
			out[i] = math.Max(out[i], rs[k])
			k++
		}
	}
	return out
}

// groundStateTable prints the ground state's local moments and its
// correlations with the first site.
func groundStateTable(w io.Writer, g *frustumv1.GroundState) error {
	n := len(g.GetSites())
	fmt.Fprintf(w, "\nGround state at E = %s K (sector %s); S^z along %s\n\n", fixed(g.GetEnergy(), 6), g.GetSector(), vector(g.GetAxis()))
	// Without S^z conservation the local spins have parts across the axis:
	// then show the lab-frame vector.
	spin, axis := g.GetSpin(), g.GetAxis()
	transverse := false
	for i := 0; 3*i+2 < len(spin) && len(axis) == 3; i++ {
		for k := 0; k < 3; k++ {
			if math.Abs(spin[3*i+k]-at(g.GetSz(), i)*axis[k]) > 1e-12 {
				transverse = true
			}
		}
	}
	header := []string{"site", "label", "<S^z>", "<S_1 . S_j>", "<S_1^z S_j^z>"}
	if transverse {
		header = []string{"site", "label", "<S^x>", "<S^y>", "<S^z>", "<S_1 . S_j>", "<S_1^z S_j^z>"}
	}
	t := &table{header: header}
	for j := 0; j < n; j++ {
		row := []string{strconv.Itoa(j + 1), g.GetSites()[j]}
		if transverse {
			row = append(row, fixed(at(spin, 3*j), 6), fixed(at(spin, 3*j+1), 6), fixed(at(spin, 3*j+2), 6))
		} else {
			row = append(row, fixed(at(g.GetSz(), j), 6))
		}
		t.add(append(row, fixed(at(g.GetSpinSpin(), j), 6), fixed(at(g.GetSzSz(), j), 6))...)
	}
	if err := t.write(w); err != nil {
		return err
	}
	if transverse {
		fmt.Fprintln(w, "  <S^x>, <S^y>, <S^z>: the local spin in the lab frame (S^z is not conserved here).")
	}
	fmt.Fprintln(w, "  Every pair <S_i . S_j> is in the --json output (groundState.spinSpin, N x N), every <S_i> in groundState.spin (N x 3).")
	return nil
}

func spectrumCSV(w io.Writer, r *frustumv1.SpectrumResult) error {
	cw := csv.NewWriter(w)
	cw.Write([]string{"level", "E (K)", "E - E0 (K)", "degeneracy", "Sz", "S"})
	e0 := 0.0
	if len(r.GetLevels()) > 0 {
		e0 = r.GetLevels()[0].GetEnergy()
	}
	for i, l := range r.GetLevels() {
		sz, s := "", ""
		if l.Sz != nil {
			sz = num(l.GetSz())
		}
		if l.TotalSpin != nil {
			s = num(l.GetTotalSpin())
		}
		cw.Write([]string{strconv.Itoa(i + 1), num(l.GetEnergy()), num(l.GetEnergy() - e0), strconv.Itoa(int(l.GetDegeneracy())), sz, s})
	}
	cw.Flush()
	return cw.Error()
}

var thermoHeader = []string{"T (K)", "E (K)", "C (k_B)", "S (k_B)", "M (mu_B)", "chi (mu_B/T)"}

func thermoTable(w io.Writer, r *frustumv1.ThermoResult) error {
	fmt.Fprintf(w, "Thermodynamics of %q per cluster at B = %s T; M and chi along %s\n\n",
		r.GetClusterName(), vector(r.GetField()), vector(r.GetSusceptibilityDirection()))
	t := &table{header: thermoHeader}
	stat := len(r.GetEnergyError()) > 0
	for i, T := range r.GetTemperature() {
		if stat {
			t.add(sig(T, 6), withError(at(r.GetEnergy(), i), at(r.GetEnergyError(), i)), withError(at(r.GetSpecificHeat(), i), at(r.GetSpecificHeatError(), i)),
				withError(at(r.GetEntropy(), i), at(r.GetEntropyError(), i)), withError(at(r.GetMagnetization(), i), at(r.GetMagnetizationError(), i)),
				withError(at(r.GetSusceptibility(), i), at(r.GetSusceptibilityError(), i)))
			continue
		}
		t.add(sig(T, 6), fixed(at(r.GetEnergy(), i), 4), fixed(at(r.GetSpecificHeat(), i), 5),
			fixed(at(r.GetEntropy(), i), 5), fixed(at(r.GetMagnetization(), i), 5), sig(at(r.GetSusceptibility(), i), 6))
	}
	if err := t.write(w); err != nil {
		return err
	}
	if stat {
		fmt.Fprintln(w, "  Statistical estimates: value +- one standard deviation (finite-temperature Lanczos).")
	}
	return report(w, r.GetEngine())
}

// withError prints v +- e with the error's two significant digits setting
// the decimals; e = 0 prints v alone (an exact value).
func withError(v, e float64) string {
	switch {
	case math.IsNaN(v):
		return "NaN"
	case e == 0 || math.IsNaN(e) || math.IsInf(e, 0):
		return sig(v, 6)
	case e < 1e-6*math.Max(1, math.Abs(v)):
		// Below the digits printed: the value to seven figures.
		return sig(v, 7)
	}
	d := max(0, 1-int(math.Floor(math.Log10(e))))
	return fmt.Sprintf("%.*f +- %.*f", d, v, d, e)
}

func thermoCSV(w io.Writer, r *frustumv1.ThermoResult) error {
	cw := csv.NewWriter(w)
	stat := len(r.GetEnergyError()) > 0
	header := thermoHeader
	if stat {
		header = append(append([]string(nil), thermoHeader...), "E error (K)", "C error (k_B)", "S error (k_B)", "M error (mu_B)", "chi error (mu_B/T)")
	}
	cw.Write(header)
	for i, T := range r.GetTemperature() {
		row := []string{num(T), num(at(r.GetEnergy(), i)), num(at(r.GetSpecificHeat(), i)), num(at(r.GetEntropy(), i)),
			num(at(r.GetMagnetization(), i)), num(at(r.GetSusceptibility(), i))}
		if stat {
			row = append(row, num(at(r.GetEnergyError(), i)), num(at(r.GetSpecificHeatError(), i)), num(at(r.GetEntropyError(), i)),
				num(at(r.GetMagnetizationError(), i)), num(at(r.GetSusceptibilityError(), i)))
		}
		cw.Write(row)
	}
	cw.Flush()
	return cw.Error()
}

// at returns v[i], or NaN when v is too short.
func at(v []float64, i int) float64 {
	if i < len(v) {
		return v[i]
	}
	return math.NaN()
}

// groupNames returns the sorted group names of a curve.
func groupNames(c *frustumv1.MagnetizationCurve) []string {
	return slices.Sorted(maps.Keys(c.GetGroups()))
}

func magnetizationTable(w io.Writer, r *frustumv1.MagnetizationResult) error {
	fmt.Fprintf(w, "Magnetization of %q per cluster, field along %s; saturation %s mu_B\n",
		r.GetClusterName(), vector(r.GetDirection()), fixed(r.GetSaturation(), 4))
	for _, c := range r.GetCurves() {
		fmt.Fprintf(w, "\nT = %s K\n", sig(c.GetTemperature(), 6))
		header := []string{"B (T)", "M (mu_B)", "M/M_sat"}
		groups := groupNames(c)
		for _, g := range groups {
			header = append(header, "M["+g+"] (mu_B)")
		}
		t := &table{header: header}
		for i, B := range r.GetField() {
			m := at(c.GetMagnetization(), i)
			ratio := math.NaN()
			if r.GetSaturation() > 0 {
				ratio = m / r.GetSaturation()
			}
			row := []string{sig(B, 6), fixed(m, 5), fixed(ratio, 4)}
			if len(c.GetMagnetizationError()) > 0 {
				row[1] = withError(m, at(c.GetMagnetizationError(), i))
			}
			for _, g := range groups {
				row = append(row, fixed(at(c.GetGroups()[g].GetValues(), i), 5))
			}
			t.add(row...)
		}
		if err := t.write(w); err != nil {
			return err
		}
	}
	if p := r.GetPowder(); p != nil {
		fmt.Fprintf(w, "\nPowder average: %s, %d directions (degree %d), %d computed after symmetry (%s).\n",
			p.GetRule(), p.GetDirections(), p.GetDegree(), p.GetEvaluated(), p.GetSymmetry())
		if p.GetCoarseDirections() > 0 {
			fmt.Fprintf(w, "Convergence: largest deviation from %s (%d directions) %s mu_B, %.2g of saturation.\n",
				p.GetCoarseRule(), p.GetCoarseDirections(), sig(p.GetDeviation(), 3), p.GetRelativeDeviation())
		}
	}
	return report(w, r.GetEngine())
}

// magnetizationCSV writes one row per field and, for each temperature, a
// column of M and one per group.
func magnetizationCSV(w io.Writer, r *frustumv1.MagnetizationResult) error {
	cw := csv.NewWriter(w)
	header := []string{"B (T)"}
	for _, c := range r.GetCurves() {
		T := sig(c.GetTemperature(), 6)
		header = append(header, fmt.Sprintf("M (mu_B) at T=%s K", T))
		for _, g := range groupNames(c) {
			header = append(header, fmt.Sprintf("M[%s] (mu_B) at T=%s K", g, T))
		}
	}
	cw.Write(header)
	for i, B := range r.GetField() {
		row := []string{num(B)}
		for _, c := range r.GetCurves() {
			row = append(row, num(at(c.GetMagnetization(), i)))
			for _, g := range groupNames(c) {
				row = append(row, num(at(c.GetGroups()[g].GetValues(), i)))
			}
		}
		cw.Write(row)
	}
	cw.Flush()
	return cw.Error()
}

// report prints the engine report on a few lines.
func report(w io.Writer, e *frustumv1.EngineReport) error {
	if e == nil {
		return nil
	}
	kind := "real"
	if e.GetComplex() {
		kind = "complex Hermitian"
	}
	diag := "dense diagonalizations"
	if e.GetDiagonalizations() == 1 {
		diag = "dense diagonalization"
	}
	if e.GetMatvecs() > 0 {
		diag = fmt.Sprintf("sectors solved, %d Hamiltonian applications", e.GetMatvecs())
	}
	fmt.Fprintf(w, "\nEngine: %s of %d states, %s matrices, %d %s\n",
		e.GetMethod(), e.GetDimension(), kind, e.GetDiagonalizations(), diag)
	if e.GetSymmetry() != "" {
		fmt.Fprintf(w, "Symmetry: %s\n", oneLine(e.GetSymmetry()))
	}
	if e.GetRoute() != "" {
		fmt.Fprintf(w, "Route: %s\n", oneLine(e.GetRoute()))
	}
	fmt.Fprintf(w, "Sectors: %s\n", sectorSummary(e.GetSectors()))
	fmt.Fprintf(w, "Memory: about %s at peak (estimate)\n", ed.FormatBytes(e.GetMemoryBytes()))
	if e.GetSolver() != "" {
		fmt.Fprintf(w, "Solver: %s\n", oneLine(e.GetSolver()))
	}
	if n := e.GetEigenvectorsSkipped(); n > 0 {
		fmt.Fprintf(w, "Eigenvectors: %d computed, %d skipped (those states carry at most %.1e of their sector's partition function; the moments leave them out)\n",
			e.GetEigenvectors(), n, e.GetNeglectedWeight())
	}
	for _, warning := range e.GetWarnings() {
		fmt.Fprintf(w, "Warning: %s\n", oneLine(warning))
	}
	return nil
}

// sectorSummary lists the sectors with their dimensions, the first few by
// name.
func sectorSummary(s []*frustumv1.Sector) string {
	if len(s) == 0 {
		return "none reported"
	}
	largest := int64(0)
	for _, x := range s {
		largest = max(largest, x.GetDimension())
	}
	const shown = 8
	var parts []string
	for i, x := range s {
		if i == shown {
			parts = append(parts, fmt.Sprintf("... %d more", len(s)-shown))
			break
		}
		parts = append(parts, fmt.Sprintf("%s (%d)", x.GetLabel(), x.GetDimension()))
	}
	return fmt.Sprintf("%d, largest %d states: %s", len(s), largest, strings.Join(parts, ", "))
}

// progressTo returns a progress callback that draws one updating line on
// stderr when it is a terminal, and nil (no progress) otherwise.
func progressTo(stderr io.Writer) ed.Progress {
	f, ok := stderr.(*os.File)
	if !ok {
		return nil
	}
	st, err := f.Stat()
	if err != nil || st.Mode()&os.ModeCharDevice == 0 {
		return nil
	}
	var mu sync.Mutex
	start := time.Now()
	var last time.Time
	return func(stage string, done, total int) {
		mu.Lock()
		defer mu.Unlock()
		now := time.Now()
		finished := total > 0 && done >= total
		if now.Sub(start) < time.Second || (!finished && now.Sub(last) < 200*time.Millisecond) {
			return
		}
		last = now
		fmt.Fprintf(f, "\r\033[K%s: %d/%d", stage, done, total)
		if finished {
			fmt.Fprint(f, "\r\033[K")
		}
	}
}
