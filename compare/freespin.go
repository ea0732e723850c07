package compare

import (
	"math"
	"strconv"

	"frustum/ed"
)

// Brillouin returns the Brillouin function of spin S > 0,
//
//	B_S(x) = ((2S+1)/2S) coth((2S+1)x/2S) - (1/2S) coth(x/2S),
//
// so that a free spin S in the field has <S^z> = S B_S(g mu_B S B / k_B T).
// B_S is odd, rises from 0 with slope (S+1)/(3S) and tends to +-1; B_{1/2}
// is tanh, and S = +Inf gives the Langevin function coth x - 1/x.
//
// With a = (2S+1)/2S, b = 1/2S and L(u) = coth u - 1/u the Langevin
// function, the two 1/x poles cancel exactly: B_S(x) = a L(ax) - b L(bx).
// That form is evaluated (L by its continued fraction near 0) where b|x| < 1,
// and 1 + 2a/(e^{2a|x|} - 1) - 2b/(e^{2b|x|} - 1) beyond, so that no digits
// are lost at small |x|, nothing overflows at large |x|, B_S(0) is exactly 0
// and B_S is exactly 1 once 1 - B_S is below half an ulp. It returns NaN when S is not > 0 or x is NaN.
func Brillouin(S, x float64) float64 {
	if !(S > 0) || math.IsNaN(x) {
		return math.NaN()
	}
	b := 1 / (2 * S)
	a := 1 + b
	u := math.Abs(x)
	if b*u >= 1 {
		// coth v = 1 + 2/(e^{2v} - 1): B_S = (a - b) + the two exponential
		// tails, with a - b = 1; exactly 1 once the tails underflow.
		return math.Copysign(1+2*a/math.Expm1(2*a*u)-2*b/math.Expm1(2*b*u), x)
	}
	return math.Copysign(a*langevin(a*u)-b*langevin(b*u), x)
}

// BrillouinDerivative returns dB_S/dx for spin S > 0: (S+1)/(3S) at x = 0,
// even in x, positive, and falling off as exp(-|x|/S) at large |x|. In
// closed form
//
//	B_S'(x) = b^2 csch^2(bx) - a^2 csch^2(ax),   a = (2S+1)/2S, b = 1/2S,
//
// which is used where b|x| >= 1; below, where both terms carry 1/x^2 poles
// that cancel, it is evaluated as a^2 L'(ax) - b^2 L'(bx) with L the
// Langevin function (the same cancellation done exactly). It returns NaN
// when S is not > 0 or x is NaN.
func BrillouinDerivative(S, x float64) float64 {
	if !(S > 0) || math.IsNaN(x) {
		return math.NaN()
	}
	b := 1 / (2 * S)
	a := 1 + b
	u := math.Abs(x)
	if b*u < 1 {
		return a*a*langevinDerivative(a*u) - b*b*langevinDerivative(b*u)
	}
	cb, ca := 1/math.Sinh(b*u), 1/math.Sinh(a*u)
	return b*b*cb*cb - a*a*ca*ca
}

// langevinCut is the |u| below which the Langevin function and its
// derivative are taken from the continued fraction; above it the closed
// forms lose at most a factor 2 to cancellation.
const langevinCut = 2

// langevinOverU returns L(u)/u for |u| <= langevinCut from Lambert's
// continued fraction coth u = 1/u + u/(3 + u^2/(5 + u^2/(7 + ...))), so
// L(u)/u = 1/(3 + u^2/(5 + u^2/(7 + ...))). At |u| = 2 the 24 levels used
// leave an error far below one ulp.
func langevinOverU(u float64) float64 {
	u2 := u * u
	d := 2*24 + 3.0
	for k := 23; k >= 1; k-- {
		d = float64(2*k+1) + u2/d
	}
	return 1 / d
}

// langevin returns L(u) = coth u - 1/u, for any u (L(+-Inf) = +-1).
func langevin(u float64) float64 {
	if math.Abs(u) <= langevinCut {
		return u * langevinOverU(u)
	}
	return 1/math.Tanh(u) - 1/u
}

// langevinDerivative returns L'(u) = 1/u^2 - csch^2 u (1/3 at u = 0), for
// any u. Near 0 it uses the identity L' = 1 - L^2 - 2L/u with L/u from the
// continued fraction; there 1 - 2L/u loses less than two bits.
func langevinDerivative(u float64) float64 {
	if math.Abs(u) <= langevinCut {
		q := langevinOverU(u)
		return 1 - 2*q - u*u*q*q
	}
	c := 1 / math.Sinh(u)
	r := 1 / u
	return r*r - c*c
}

// ScalingVariable returns x = g mu_B B / (2 k_B T), dimensionless, for a
// field B in T and a temperature T in K. A free spin's polarization is a
// function of x alone (B_S(2 S x); tanh x for S = 1/2), so curves measured at
// different temperatures collapse onto one when plotted against x; a coupled
// cluster breaks that scaling. B/T is formed first, so (B, T) and (2B, 2T)
// give bit-identical x.
func ScalingVariable(g, B, T float64) float64 {
	return g * ed.MuBOverKB * (B / T) / 2
}

// FreeSpin is an uncoupled spin S with an isotropic g factor G: the
// paramagnetic baseline that a cluster model is set against. S is a positive
// multiple of 1/2 for a physical spin (any S > 0 is evaluated).
//
// Its methods take a field B in T (along the quantization axis, of either
// sign) and a temperature T > 0 in K, and return NaN for T <= 0, S <= 0 or
// NaN arguments. They depend on B and T only through B/T.
type FreeSpin struct {
	S, G float64
}

// argument returns y = G mu_B S B / k_B T, the Brillouin argument.
func (f FreeSpin) argument(B, T float64) float64 {
	if !(T > 0) {
		return math.NaN()
	}
	return f.G * ed.MuBOverKB * f.S * (B / T)
}

// Polarization returns <S^z>/S = M/M_sat = B_S(G mu_B S B / k_B T),
// dimensionless, between -1 and 1.
func (f FreeSpin) Polarization(B, T float64) float64 {
	return Brillouin(f.S, f.argument(B, T))
}

// Moment returns M = G <S^z> = G S B_S(G mu_B S B / k_B T) in mu_B, along
// the field.
func (f FreeSpin) Moment(B, T float64) float64 {
	return f.G * f.S * f.Polarization(B, T)
}

// Fluctuation returns k_B T chi / mu_B = T (dM/dB) / MuBOverKB, with dM/dB
// in mu_B/T: a number in mu_B (read as k_B T chi, the same number is in
// mu_B^2). Derivation: with y = G (mu_B/k_B) S B / T,
//
//	dM/dB = G S B_S'(y) dy/dB = G^2 S^2 B_S'(y) (mu_B/k_B) / T,
//
// so the result is G^2 S^2 B_S'(y). It equals G^2 Var(S^z) (fluctuation-
// dissipation: <S^z> = S B_S(y) with y = beta G mu_B B S, and d<S^z>/d(beta
// G mu_B B) = Var(S^z)), and at B = 0 it is the Curie value G^2 S(S+1)/3.
func (f FreeSpin) Fluctuation(B, T float64) float64 {
	return f.G * f.G * f.S * f.S * BrillouinDerivative(f.S, f.argument(B, T))
}

// Name returns "free spin 1/2", "free spin 1", "free spin 3/2", ...; a spin
// that is not a multiple of 1/2 is written as a decimal number.
func (f FreeSpin) Name() string {
	two := 2 * f.S
	switch {
	case two != math.Trunc(two) || math.IsInf(two, 0) || math.Abs(two) > 1<<53:
		return "free spin " + strconv.FormatFloat(f.S, 'g', -1, 64)
	case math.Mod(two, 2) == 0:
		return "free spin " + strconv.FormatFloat(f.S, 'f', 0, 64)
	default:
		return "free spin " + strconv.FormatFloat(two, 'f', 0, 64) + "/2"
	}
}
