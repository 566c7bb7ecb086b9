package hydraulic

import "math"

// Gravity is the standard acceleration of gravity, m/s² (CGPM 1901).
const Gravity = 9.80665

// Hazen-Williams SI constants: h = 10.67 L Q^1.852 / (C^1.852 D^4.8704),
// Q in m³/s, L and D in m (the usual SI form of Williams & Hazen 1905).
const (
	hwCoeff     = 10.67
	hwFlowExp   = 1.852
	hwDiamExp   = 4.8704
	laminarRe   = 2000.0 // upper end of laminar flow (common practice)
	turbulentRe = 4000.0 // lower end of fully turbulent flow (common practice)
)

// HazenWilliamsLoss returns the friction head loss (m) of a pipe of the
// given length (m), internal diameter (m) and Hazen-Williams factor C
// carrying flow q (m³/s). The loss has the sign of q.
func HazenWilliamsLoss(q, length, diameter, c float64) float64 {
	r := hazenWilliamsResistance(length, diameter, c)
	return r * q * math.Pow(math.Abs(q), hwFlowExp-1)
}

// hwPow returns x^0.852 (math.Pow(x, hwFlowExp-1) to within a few ulp)
// from hwPowTable: the head-loss law evaluates it for every pipe at every
// Newton iteration.
func hwPow(x float64) float64 { return hwPowTable.pow(x) }

// hazenWilliamsResistance is the coefficient R of h = R Q|Q|^0.852
// (m per (m³/s)^1.852).
func hazenWilliamsResistance(length, diameter, c float64) float64 {
	return hwCoeff * length / (math.Pow(c, hwFlowExp) * math.Pow(diameter, hwDiamExp))
}

// ColebrookWhite returns the Darcy friction factor of fully developed
// turbulent flow at Reynolds number re in a pipe of relative roughness
// relRough = ε/D, from the implicit equation of Colebrook (1939)
//
//	1/√f = −2 log10(ε/(3.7 D) + 2.51/(Re √f)),
//
// solved by Newton's method on x = 1/√f to machine precision. It is meant
// for re above about 4000; FrictionFactor blends it with the laminar law.
func ColebrookWhite(re, relRough float64) float64 {
	x := colebrookX(re, relRough)
	return 1 / (x * x)
}

// colebrookX solves x + 2 log10(a + b x) = 0, a = ε/3.7D, b = 2.51/Re.
func colebrookX(re, relRough float64) float64 {
	a := relRough / 3.7
	b := 2.51 / re
	// Start from the explicit estimate of Swamee & Jain (1976).
	x := -2 * math.Log10(a+5.74/math.Pow(re, 0.9))
	for i := 0; i < 60; i++ {
		arg := a + b*x
		fx := x + 2*math.Log10(arg)
		dfx := 1 + 2*b/(arg*math.Ln10)
		dx := fx / dfx
		x -= dx
		if math.Abs(dx) <= 4e-16*math.Abs(x) {
			break
		}
	}
	return x
}

// colebrookDeriv returns f and df/dRe of Colebrook-White by implicit
// differentiation of x + 2 log10(a + b x) = 0 with b = 2.51/Re.
func colebrookDeriv(re, relRough float64) (f, dfdRe float64) {
	x := colebrookX(re, relRough)
	a := relRough / 3.7
	b := 2.51 / re
	arg := a + b*x
	c := 2 / math.Ln10
	// dx (1 + c b/arg) = c x b /(Re arg) dRe
	dxdRe := c * x * b / (re * arg) / (1 + c*b/arg)
	f = 1 / (x * x)
	dfdRe = -2 / (x * x * x) * dxdRe
	return f, dfdRe
}

// FrictionFactor returns the Darcy friction factor at Reynolds number re
// and relative roughness relRough = ε/D: 64/Re for laminar flow
// (Re ≤ 2000, Hagen-Poiseuille), Colebrook-White for Re ≥ 4000, and
// between them a cubic in Re that matches both laws and their slopes at
// the two ends (a Hermite blend, our choice), so that f and df/dRe are
// continuous everywhere. re must be positive.
func FrictionFactor(re, relRough float64) float64 {
	f, _ := frictionFactorDeriv(re, relRough)
	return f
}

// frictionFactorDeriv returns f and df/dRe (see FrictionFactor).
func frictionFactorDeriv(re, relRough float64) (f, dfdRe float64) {
	switch {
	case re <= laminarRe:
		return 64 / re, -64 / (re * re)
	case re >= turbulentRe:
		return colebrookDeriv(re, relRough)
	}
	f0, d0 := 64/laminarRe, -64/(laminarRe*laminarRe)
	f1, d1 := colebrookDeriv(turbulentRe, relRough)
	w := turbulentRe - laminarRe
	t := (re - laminarRe) / w
	t2, t3 := t*t, t*t*t
	h00 := 2*t3 - 3*t2 + 1
	h10 := t3 - 2*t2 + t
	h01 := -2*t3 + 3*t2
	h11 := t3 - t2
	f = h00*f0 + h10*w*d0 + h01*f1 + h11*w*d1
	dh00 := (6*t2 - 6*t) / w
	dh10 := (3*t2 - 4*t + 1) / w
	dh01 := (-6*t2 + 6*t) / w
	dh11 := (3*t2 - 2*t) / w
	dfdRe = dh00*f0 + dh10*w*d0 + dh01*f1 + dh11*w*d1
	return f, dfdRe
}

// DarcyWeisbachLoss returns the friction head loss (m) of a pipe of the
// given length (m), diameter (m) and absolute roughness (m) carrying flow
// q (m³/s) of water of kinematic viscosity nu (m²/s):
// h = f (L/D) v²/(2g), f from FrictionFactor. The loss has the sign of q.
func DarcyWeisbachLoss(q, length, diameter, roughness, nu float64) float64 {
	h, _ := darcyWeisbach(q, length, diameter, roughness/diameter, nu)
	return h
}

// darcyWeisbach returns h and dh/dq (SI) of the Darcy-Weisbach law.
func darcyWeisbach(q, length, diameter, relRough, nu float64) (h, g float64) {
	area := math.Pi * diameter * diameter / 4
	k := length / diameter / (2 * Gravity * area * area)
	aq := math.Abs(q)
	re := aq * diameter / (area * nu)
	if re <= laminarRe {
		// f = 64/Re: h = k·64·A·ν/D·q, linear in q (Hagen-Poiseuille).
		lin := k * 64 * area * nu / diameter
		return lin * q, lin
	}
	f, df := frictionFactorDeriv(re, relRough)
	h = k * f * q * aq
	g = k * aq * (2*f + re*df)
	return h, g
}

// MinorLoss returns the head loss K v²/(2g) (m) of a fitting of loss
// coefficient k in a conduit of diameter (m) carrying q (m³/s), with the
// sign of q.
func MinorLoss(q, diameter, k float64) float64 {
	area := math.Pi * diameter * diameter / 4
	return k / (2 * Gravity * area * area) * q * math.Abs(q)
}

// LeakFlow returns the FAVAD leak outflow q = c·p^n (L/s) of May (1994) at
// pressure p (m), and dq/dp. It is zero, with a zero slope, for p ≤ 0: an
// orifice below atmospheric pressure lets nothing out (and the model lets
// nothing in). For 0 < n < 1 the slope n·q/p grows without bound as p
// falls to 0; the Solver therefore does not linearise such leaks in the
// pressure but solves them in flow form (see leakHead and the package
// doc), where the law p = (q/c)^(1/n) is convex and has a finite slope.
func LeakFlow(c, n, p float64) (q, dqdp float64) {
	if c == 0 || p <= 0 {
		return 0, 0
	}
	q = c * math.Pow(p, n)
	return q, n * q / p
}

// leakHead is the inverse of LeakFlow for q > 0: the pressure p (m) at
// which a leak of coefficient c and exponent n lets out q (L/s), and
// dp/dq. It returns 0, 0 for q ≤ 0.
func leakHead(c, n, q float64) (p, dpdq float64) {
	if q <= 0 {
		return 0, 0
	}
	p = math.Pow(q/c, 1/n)
	return p, p / (n * q)
}
