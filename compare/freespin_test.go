package compare

import (
	"context"
	"math"
	"testing"

	"frustum/cluster"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
)

// fsRelClose reports whether got is within tol of want, relative to |want|
// (absolute when want is 0).
func fsRelClose(got, want, tol float64) bool {
	if want == 0 {
		return math.Abs(got) <= tol
	}
	return math.Abs(got-want) <= tol*math.Abs(want)
}

// freeSpinTestSpins are the spins most tests run over.
var freeSpinTestSpins = []float64{0.5, 1, 1.5, 2, 2.5, 3.5, 7}

// fsLogSpaced returns n points from lo to hi, evenly spaced in log.
func fsLogSpaced(lo, hi float64, n int) []float64 {
	out := make([]float64, n)
	for i := range out {
		out[i] = lo * math.Pow(hi/lo, float64(i)/float64(n-1))
	}
	return out
}

func TestBrillouinPublishedTable(t *testing.T) {
	// Source: Brillouin, J. Phys. Radium 8, 74 (1927): <S^z> = S B_S(g mu_B S
	// B / k_B T); the values at g = 2, B = 1 T, T = 1 K are the "Brillouin"
	// row of PHYSICS.md (EXACT, 10 decimals quoted, so the tolerance is 1e-10
	// absolute).
	for _, c := range []struct{ S, want float64 }{
		{0.5, 0.2930530491},
		{1, 0.7011844228},
		{2.5, 2.1488072218},
	} {
		f := FreeSpin{S: c.S, G: 2}
		got := c.S * f.Polarization(1, 1)
		if math.Abs(got-c.want) > 1e-10 {
			t.Errorf("S = %g: <S^z> = %.12f, want %.10f (Brillouin 1927)", c.S, got, c.want)
		}
		if m := f.Moment(1, 1); math.Abs(m-2*c.want) > 2e-10 {
			t.Errorf("S = %g: M = %.12f mu_B, want g <S^z> = %.10f", c.S, m, 2*c.want)
		}
	}
}

func TestBrillouinHalfIsTanh(t *testing.T) {
	// Closed form (derivation): for S = 1/2, a = 2 and b = 1, and the identity
	// 2 coth 2x = coth x + tanh x gives B_{1/2}(x) = 2 coth 2x - coth x =
	// tanh x. Tolerance: a few ulps.
	for _, x := range fsLogSpaced(1e-300, 1e3, 400) {
		for _, s := range []float64{1, -1} {
			got, want := Brillouin(0.5, s*x), math.Tanh(s*x)
			if !fsRelClose(got, want, 4e-16) {
				t.Errorf("B_1/2(%g) = %.17g, tanh = %.17g", s*x, got, want)
			}
		}
	}
}

func TestBrillouinSmallXSeries(t *testing.T) {
	// Published series: coth u = 1/u + u/3 - u^3/45 + 2u^5/945 - ...
	// (Abramowitz and Stegun 4.5.67), so with a = (2S+1)/2S, b = 1/2S,
	// B_S(x) = (a^2-b^2) x/3 - (a^4-b^4) x^3/45 + 2 (a^6-b^6) x^5/945 - ...,
	// whose first coefficient is (S+1)/(3S). At x = 1e-3 the next term is
	// below 1e-19 relative.
	for _, S := range freeSpinTestSpins {
		b := 1 / (2 * S)
		a := 1 + b
		for _, x := range []float64{1e-3, 1e-6, 1e-12, 1e-200} {
			want := (a*a-b*b)*x/3 - (math.Pow(a, 4)-math.Pow(b, 4))*math.Pow(x, 3)/45 +
				2*(math.Pow(a, 6)-math.Pow(b, 6))*math.Pow(x, 5)/945
			if got := Brillouin(S, x); !fsRelClose(got, want, 1e-15) {
				t.Errorf("S = %g: B_S(%g) = %.17g, series %.17g", S, x, got, want)
			}
		}
		if got, want := Brillouin(S, 1e-9)/1e-9, (S+1)/(3*S); !fsRelClose(got, want, 1e-15) {
			t.Errorf("S = %g: slope at 0 = %.17g, want (S+1)/(3S) = %.17g", S, got, want)
		}
	}
}

func TestBrillouinLangevinLimit(t *testing.T) {
	// Published limit: as S -> infinity, B_S(x) -> L(x) = coth x - 1/x
	// (Langevin, Ann. Chim. Phys. 5, 70 (1905); any magnetism text). The
	// approach is checked too (derivation): with b = 1/2S, a = 1 + b, Taylor
	// expansion of a L(ax) in b and b L(bx) = b^2 x/3 + O(b^4 x^3) give
	//
	//	2S (B_S - L) = [L + x L'] + b [x L' + x^2 L''/2 - x/3] + O(b^2 (1+x)^2),
	//
	// L' = 1/x^2 - csch^2 x, L'' = 2 csch^2 x coth x - 2/x^3. L and its
	// derivatives are written out here in closed form, at x >= 0.5 where
	// that form is accurate.
	lang := func(x float64) float64 { return 1/math.Tanh(x) - 1/x }
	csch2 := func(x float64) float64 { return 1 / (math.Sinh(x) * math.Sinh(x)) }
	dlang := func(x float64) float64 { return 1/(x*x) - csch2(x) }
	ddlang := func(x float64) float64 { return 2*csch2(x)/math.Tanh(x) - 2/(x*x*x) }
	for _, x := range []float64{0.5, 1, 2, 3, 5, 10, 30} {
		if got, want := Brillouin(math.Inf(1), x), lang(x); !fsRelClose(got, want, 1e-14) {
			t.Errorf("B_inf(%g) = %.17g, Langevin %.17g", x, got, want)
		}
		first := lang(x) + x*dlang(x)
		second := x*dlang(x) + x*x*ddlang(x)/2 - x/3
		for _, S := range []float64{100, 1000, 1e4} {
			b := 1 / (2 * S)
			got := 2 * S * (Brillouin(S, x) - lang(x))
			// The O(b^2) rest, plus the rounding of the difference times 2S.
			if want := first + b*second; math.Abs(got-want) > b*b*(1+x)*(1+x)+2*S*1e-15 {
				t.Errorf("x = %g, S = %g: 2S (B_S - L) = %.12g, want %.12g to O(1/S^2)", x, S, got, want)
			}
		}
	}
}

func TestBrillouinOddZeroAndLimits(t *testing.T) {
	// Derivation: B_S is odd (coth is), B_S(0) = 0, and B_S(+-inf) = a - b = +-1.
	for _, S := range append(freeSpinTestSpins, 1000) {
		if got := Brillouin(S, 0); got != 0 {
			t.Errorf("S = %g: B_S(0) = %g, want exactly 0", S, got)
		}
		for _, x := range fsLogSpaced(1e-300, 1e300, 200) {
			p, m := Brillouin(S, x), Brillouin(S, -x)
			if m != -p {
				t.Errorf("S = %g: B_S(-%g) = %.17g, -B_S(%g) = %.17g", S, x, m, x, -p)
			}
			if math.IsNaN(p) || p <= 0 || p > 1 {
				t.Errorf("S = %g: B_S(%g) = %g, want in (0, 1]", S, x, p)
			}
			d := BrillouinDerivative(S, x)
			if BrillouinDerivative(S, -x) != d {
				t.Errorf("S = %g: B_S' is not even at %g", S, x)
			}
			if math.IsNaN(d) || d < 0 || d > (S+1)/(3*S)*(1+1e-15) {
				t.Errorf("S = %g: B_S'(%g) = %g, want in [0, (S+1)/3S]", S, x, d)
			}
		}
		for _, x := range []float64{1e6, math.MaxFloat64, math.Inf(1)} {
			if got := Brillouin(S, x); got != 1 {
				t.Errorf("S = %g: B_S(%g) = %.17g, want 1", S, x, got)
			}
			if got := BrillouinDerivative(S, x); got != 0 {
				t.Errorf("S = %g: B_S'(%g) = %g, want 0", S, x, got)
			}
		}
	}
	for _, S := range []float64{0, -0.5, math.NaN()} {
		if !math.IsNaN(Brillouin(S, 1)) || !math.IsNaN(BrillouinDerivative(S, 1)) {
			t.Errorf("S = %g: want NaN for a spin that is not > 0", S)
		}
	}
	if !math.IsNaN(Brillouin(1, math.NaN())) || !math.IsNaN(BrillouinDerivative(1, math.NaN())) {
		t.Error("x = NaN: want NaN")
	}
}

func TestBrillouinDerivativeClosedForm(t *testing.T) {
	// Closed form (derivation, d/du coth u = -csch^2 u):
	// B_S'(x) = b^2 csch^2(bx) - a^2 csch^2(ax), a = (2S+1)/2S, b = 1/2S,
	// written out here directly. At 0.3 <= x <= 30 and the spins below the
	// two terms cancel by less than a factor 1e3, so 1e-12 holds.
	for _, S := range freeSpinTestSpins {
		b := 1 / (2 * S)
		a := 1 + b
		for _, x := range fsLogSpaced(0.3, 30, 60) {
			cb, ca := 1/math.Sinh(b*x), 1/math.Sinh(a*x)
			want := b*b*cb*cb - a*a*ca*ca
			if got := BrillouinDerivative(S, x); !fsRelClose(got, want, 1e-12) {
				t.Errorf("S = %g: B_S'(%g) = %.17g, closed form %.17g", S, x, got, want)
			}
		}
		// At x = 0 (series above, differentiated): (a^2 - b^2)/3 = (S+1)/(3S).
		if got, want := BrillouinDerivative(S, 0), (S+1)/(3*S); !fsRelClose(got, want, 2e-16) {
			t.Errorf("S = %g: B_S'(0) = %.17g, want (S+1)/(3S) = %.17g", S, got, want)
		}
		// Near 0, the derivative of the series of Abramowitz and Stegun 4.5.67:
		// (a^2-b^2)/3 - (a^4-b^4) x^2/15 + 2 (a^6-b^6) x^4/189.
		for _, x := range []float64{1e-3, 1e-5} {
			want := (a*a-b*b)/3 - (math.Pow(a, 4)-math.Pow(b, 4))*x*x/15 + 2*(math.Pow(a, 6)-math.Pow(b, 6))*math.Pow(x, 4)/189
			if got := BrillouinDerivative(S, x); !fsRelClose(got, want, 1e-15) {
				t.Errorf("S = %g: B_S'(%g) = %.17g, series %.17g", S, x, got, want)
			}
		}
	}
	// S = 1/2: d tanh x/dx = sech^2 x (closed form), at every x.
	for _, x := range fsLogSpaced(1e-300, 300, 300) {
		c := 1 / math.Cosh(x)
		if got, want := BrillouinDerivative(0.5, x), c*c; !fsRelClose(got, want, 1e-13) {
			t.Errorf("B_1/2'(%g) = %.17g, sech^2 = %.17g", x, got, want)
		}
	}
}

func TestBrillouinDerivativeCentralDifference(t *testing.T) {
	// Common practice, no source: a central difference of Brillouin with step
	// h has error h^2 B'''/6 plus rounding eps/h; h = 1e-5 leaves < 1e-9.
	const h = 1e-5
	for _, S := range append(freeSpinTestSpins, 1000) {
		for _, x := range []float64{-4, -0.7, 0, 0.01, 0.3, 1, 1.9, 2.1, 3, 8, 20} {
			num := (Brillouin(S, x+h) - Brillouin(S, x-h)) / (2 * h)
			if got := BrillouinDerivative(S, x); math.Abs(got-num) > 1e-9 {
				t.Errorf("S = %g, x = %g: B_S' = %.12g, central difference %.12g", S, x, got, num)
			}
		}
	}
}

func TestScalingVariable(t *testing.T) {
	// Source: PHYSICS.md, constants (CODATA 2018): g mu_B B / k_B at g = 2,
	// B = 1 T is 1.3434276 K, so x = g mu_B B / (2 k_B T) at T = 1 K is half
	// of it; and it is that of twice the field at twice the temperature.
	if got := ScalingVariable(2, 1, 1); math.Abs(got-1.3434276/2) > 1e-7 {
		t.Errorf("x(g=2, 1 T, 1 K) = %.10g, want %.8g", got, 1.3434276/2)
	}
	if got, want := ScalingVariable(2.1, 3, 7), 2.1*ed.MuBOverKB*3/(2*7); !fsRelClose(got, want, 1e-15) {
		t.Errorf("x(2.1, 3 T, 7 K) = %.17g, want %.17g", got, want)
	}
}

func TestFreeSpinScaling(t *testing.T) {
	// Derivation: a free spin's Boltzmann weights depend on g mu_B B m / k_B T
	// only, so its polarization at (B, T) and (2B, 2T) are equal (exactly:
	// B/T is the same number), and it is B_S(2 S x) with x = ScalingVariable;
	// for S = 1/2, tanh x (closed form, see TestBrillouinHalfIsTanh). A
	// coupled cluster does not have this property.
	for _, S := range freeSpinTestSpins {
		f := FreeSpin{S: S, G: 2.07}
		for _, T := range []float64{0.05, 0.3, 1, 4.2, 30, 300} {
			for _, B := range []float64{-9, 0.01, 0.5, 1, 3, 15, 45} {
				p := f.Polarization(B, T)
				for _, k := range []float64{2, 0.5, 8} {
					if q := f.Polarization(k*B, k*T); q != p {
						t.Errorf("S = %g: P(%g T, %g K) = %.17g but P(%g T, %g K) = %.17g", S, B, T, p, k*B, k*T, q)
					}
				}
				x := ScalingVariable(f.G, B, T)
				if want := Brillouin(S, 2*S*x); !fsRelClose(p, want, 1e-15) {
					t.Errorf("S = %g, B = %g, T = %g: P = %.17g, B_S(2 S x) = %.17g", S, B, T, p, want)
				}
				if S == 0.5 {
					if want := math.Tanh(x); !fsRelClose(p, want, 4e-16) {
						t.Errorf("S = 1/2, B = %g, T = %g: P = %.17g, tanh x = %.17g", B, T, p, want)
					}
				}
			}
		}
	}
}

// boltzmannSpin returns <S^z> and Var(S^z) of a free spin S with Zeeman
// levels E_m = -g (mu_B/k_B) B m, m = -S..S, by the explicit sum (weights
// taken relative to the lowest level).
func boltzmannSpin(S, g, B, T float64) (mean, variance float64) {
	h := g * ed.MuBOverKB * B / T
	top := S * math.Abs(h)
	var z, s1, s2 float64
	for k := 0; k <= int(math.Round(2*S)); k++ {
		m := -S + float64(k)
		w := math.Exp(h*m - top)
		z += w
		s1 += w * m
		s2 += w * m * m
	}
	mean = s1 / z
	return mean, s2/z - mean*mean
}

func TestFreeSpinAgainstBoltzmannSum(t *testing.T) {
	// Derivation (statistical mechanics of 2S+1 Zeeman levels): M = g <S^z>
	// and k_B T chi / mu_B = T (dM/dB) / (mu_B/k_B) = g^2 Var(S^z)
	// (fluctuation-dissipation; S^z commutes with H), both from the explicit
	// Boltzmann sum; and the same k_B T chi from a central difference of
	// Moment (common practice, no source).
	for _, S := range freeSpinTestSpins {
		for _, g := range []float64{2, 2.2} {
			f := FreeSpin{S: S, G: g}
			for _, T := range []float64{0.1, 1, 10} {
				for _, B := range []float64{-2, 0, 0.05, 1, 7} {
					mean, variance := boltzmannSpin(S, g, B, T)
					if got := f.Moment(B, T); math.Abs(got-g*mean) > 1e-13*g*S {
						t.Errorf("%s g=%g B=%g T=%g: M = %.15g, sum %.15g", f.Name(), g, B, T, got, g*mean)
					}
					if got := f.Polarization(B, T); math.Abs(got-mean/S) > 1e-13 {
						t.Errorf("%s g=%g B=%g T=%g: P = %.15g, sum %.15g", f.Name(), g, B, T, got, mean/S)
					}
					if got, want := f.Fluctuation(B, T), g*g*variance; math.Abs(got-want) > 1e-12*g*g*S*S {
						t.Errorf("%s g=%g B=%g T=%g: fluctuation = %.15g, g^2 Var(S^z) = %.15g", f.Name(), g, B, T, got, want)
					}
					dB := 1e-5 * T
					num := T * (f.Moment(B+dB, T) - f.Moment(B-dB, T)) / (2 * dB) / ed.MuBOverKB
					if got := f.Fluctuation(B, T); math.Abs(got-num) > 1e-7*g*g*S*S {
						t.Errorf("%s g=%g B=%g T=%g: fluctuation = %.12g, T dM/dB / (mu_B/k_B) numerically %.12g", f.Name(), g, B, T, got, num)
					}
				}
			}
		}
	}
}

func TestFreeSpinCurieLimit(t *testing.T) {
	// Curie law: at B = 0, k_B T chi = g^2 mu_B^2 S(S+1)/3 per spin, at every
	// T. Source: the Curie constant row of PHYSICS.md, C = N_A mu_B^2/(3 k_B)
	// g^2 S(S+1) = 0.12504937 g^2 S(S+1) emu K/mol; that number is rebuilt
	// here from the rows N_A mu_B = 5584.9394 emu/mol and mu_B/k_B =
	// 0.67171381563 K/T = 0.67171381563e-4 K/G: C = N_A mu_B (mu_B/k_B) times
	// the fluctuation in mu_B^2 (8 digits quoted, so 1e-7 relative).
	for _, S := range freeSpinTestSpins {
		for _, g := range []float64{2, 2.15, 1.9} {
			f := FreeSpin{S: S, G: g}
			want := g * g * S * (S + 1) / 3
			for _, T := range []float64{1e-3, 1, 300, 1e5} {
				if got := f.Fluctuation(0, T); !fsRelClose(got, want, 4e-16) {
					t.Errorf("%s g=%g T=%g: fluctuation(B=0) = %.17g, want g^2 S(S+1)/3 = %.17g", f.Name(), g, T, got, want)
				}
			}
			curie := 5584.9394 * 0.67171381563e-4 * f.Fluctuation(0, 1)
			if wantC := 0.12504937 * g * g * S * (S + 1); !fsRelClose(curie, wantC, 1e-7) {
				t.Errorf("%s g=%g: Curie constant %.9g emu K/mol, PHYSICS.md %.9g", f.Name(), g, curie, wantC)
			}
		}
	}
}

func TestFreeSpinOddInField(t *testing.T) {
	// Derivation: reversing B maps m -> -m, so M and P are odd in B and the
	// fluctuation is even; the sign handling makes this exact.
	for _, S := range freeSpinTestSpins {
		f := FreeSpin{S: S, G: 2}
		for _, B := range []float64{1e-6, 0.3, 1, 10, 40} {
			for _, T := range []float64{0.1, 2, 50} {
				if f.Polarization(-B, T) != -f.Polarization(B, T) || f.Moment(-B, T) != -f.Moment(B, T) {
					t.Errorf("%s: P or M not odd at B = %g, T = %g", f.Name(), B, T)
				}
				if f.Fluctuation(-B, T) != f.Fluctuation(B, T) {
					t.Errorf("%s: fluctuation not even at B = %g, T = %g", f.Name(), B, T)
				}
			}
		}
	}
}

func TestFreeSpinExtremeArguments(t *testing.T) {
	// Derivation: the results depend on B/T alone, saturate (P -> +-1, the
	// fluctuation -> 0) as |B|/T -> inf and are linear in B/T near 0, with
	// slope G mu_B (S+1)/(3 k_B) for P; none may be NaN.
	for _, S := range freeSpinTestSpins {
		f := FreeSpin{S: S, G: 2}
		for _, c := range []struct{ B, T, wantP float64 }{
			{1e-300, 1e-300, Brillouin(S, 2*ed.MuBOverKB*S)},
			{1e6, 1, 1},
			{15, 15e-6, 1},
			{1e300, 1e-300, 1},
			{-1e300, 1e-300, -1},
			{1e-300, 1e300, 0},
		} {
			p, m, fl := f.Polarization(c.B, c.T), f.Moment(c.B, c.T), f.Fluctuation(c.B, c.T)
			if math.IsNaN(p) || math.IsNaN(m) || math.IsNaN(fl) || math.IsInf(fl, 0) {
				t.Errorf("%s B=%g T=%g: P = %g, M = %g, fluctuation = %g", f.Name(), c.B, c.T, p, m, fl)
			}
			if p != c.wantP {
				t.Errorf("%s B=%g T=%g: P = %.17g, want %.17g", f.Name(), c.B, c.T, p, c.wantP)
			}
		}
		if fl := f.Fluctuation(1e6, 1); fl != 0 {
			t.Errorf("%s: fluctuation at B/T = 1e6 is %g, want 0 (saturated)", f.Name(), fl)
		}
		if p, want := f.Polarization(1e-9, 1), 2*ed.MuBOverKB*(S+1)/3*1e-9; !fsRelClose(p, want, 1e-15) {
			t.Errorf("%s: P(1e-9 T, 1 K) = %.17g, want the Curie slope %.17g", f.Name(), p, want)
		}
		for _, T := range []float64{0, -1, math.NaN()} {
			if !math.IsNaN(f.Polarization(1, T)) || !math.IsNaN(f.Moment(1, T)) || !math.IsNaN(f.Fluctuation(1, T)) {
				t.Errorf("%s: T = %g should give NaN", f.Name(), T)
			}
		}
	}
}

func TestFreeSpinName(t *testing.T) {
	// Common practice, no source: spins are written as fractions of 2.
	for _, c := range []struct {
		S    float64
		want string
	}{{0.5, "free spin 1/2"}, {1, "free spin 1"}, {1.5, "free spin 3/2"}, {2, "free spin 2"},
		{2.5, "free spin 5/2"}, {3.5, "free spin 7/2"}, {0.7, "free spin 0.7"}} {
		if got := (FreeSpin{S: c.S, G: 2}).Name(); got != c.want {
			t.Errorf("S = %g: Name() = %q, want %q", c.S, got, c.want)
		}
	}
}

func TestFreeSpinAgainstOneSiteCluster(t *testing.T) {
	// Derivation: a cluster of one site, with no bonds and no single-ion
	// term, is a free spin; the engine (package ed, independent code that
	// diagonalizes the Zeeman Hamiltonian) must give the same M and dM/dB,
	// by its magnetization and by its thermodynamics task.
	for _, S := range []float64{0.5, 1, 2.5} {
		g := 2.1
		m, err := cluster.FromProto(&frustumv1.Cluster{Name: "one spin", Sites: []*frustumv1.Site{{Label: "s", Spin: &S, G: &g}}})
		if err != nil {
			t.Fatal(err)
		}
		temps, fields := []float64{0.3, 2, 20}, []float64{-3, 0, 0.4, 1, 8}
		res, err := ed.Magnetization(context.Background(), m,
			ed.MagnetizationRequest{Temperatures: temps, Fields: fields, Susceptibility: true}, ed.Options{})
		if err != nil {
			t.Fatal(err)
		}
		f := FreeSpin{S: S, G: g}
		for _, c := range res.Curves {
			for i, B := range res.Field {
				if got, want := f.Moment(B, c.Temperature), c.Magnetization[i]; math.Abs(got-want) > 1e-10 {
					t.Errorf("%s T=%g B=%g: M = %.12g, engine %.12g", f.Name(), c.Temperature, B, got, want)
				}
				if len(c.Susceptibility) != len(res.Field) {
					t.Fatalf("%s: the engine gave %d susceptibilities for %d fields", f.Name(), len(c.Susceptibility), len(res.Field))
				}
				want := c.Temperature * c.Susceptibility[i] / ed.MuBOverKB
				if got := f.Fluctuation(B, c.Temperature); math.Abs(got-want) > 1e-8 {
					t.Errorf("%s T=%g B=%g: fluctuation = %.12g, engine magnetization T chi/(mu_B/k_B) = %.12g", f.Name(), c.Temperature, B, got, want)
				}
			}
		}
		for _, B := range fields {
			th, err := ed.Thermo(context.Background(), m, ed.ThermoRequest{Temperatures: temps, Field: [3]float64{0, 0, B}}, ed.Options{})
			if err != nil {
				t.Fatal(err)
			}
			for i, T := range th.Temperature {
				// The engine's M is along the field: |B| enters, and chi is even in B.
				if got, want := f.Moment(math.Abs(B), T), th.Magnetization[i]; math.Abs(got-want) > 1e-10 {
					t.Errorf("%s T=%g B=%g: M = %.12g, engine thermo %.12g", f.Name(), T, B, got, want)
				}
				want := T * th.Susceptibility[i] / ed.MuBOverKB
				if got := f.Fluctuation(B, T); math.Abs(got-want) > 1e-8 {
					t.Errorf("%s T=%g B=%g: fluctuation = %.12g, engine T chi/(mu_B/k_B) = %.12g", f.Name(), T, B, got, want)
				}
			}
		}
		if want := g * S; math.Abs(res.Saturation-want) > 1e-12 {
			t.Errorf("%s: engine saturation %g, want g S = %g", f.Name(), res.Saturation, want)
		}
	}
}
