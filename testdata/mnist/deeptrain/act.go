package main

import (
	"math"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/passes"
)

// activation is either the exact ReLU or the polynomial the encrypted
// program evaluates in its place: the Chebyshev interpolant of ReLU of a
// given degree over [lo, hi], computed by chebyshev below with the formula
// of the compiler's passes.ChebyshevInterpolant (kept here so the trainer
// does not build the compiler), so training sees the coefficients the
// program uses. The golden test checks the outcome: its accuracy figure is
// the compiler's own float64 reference of the model.
type activation struct {
	poly   bool
	lo, hi float64
	c      []float64 // Chebyshev coefficients in t = (2x − lo − hi)/(hi − lo)
	// clamp makes the polynomial constant outside [lo, hi] while
	// training, so that a value escaping the interval early in training does
	// not blow up; value, used for every reported accuracy, never clamps.
	clamp bool
}

func relu() *activation { return &activation{} }

func polyReLU(lo, hi float64, degree int) *activation {
	f := func(x float64) float64 { return math.Max(x, 0) }
	return &activation{poly: true, lo: lo, hi: hi, c: passes.ChebyshevInterpolant(f, lo, hi, degree)}
}

func (a *activation) t(x float64) float64 { return (2*x - a.lo - a.hi) / (a.hi - a.lo) }

// value is the activation as the encrypted program computes it.
func (a *activation) value(x float64) float64 {
	if !a.poly {
		return math.Max(x, 0)
	}
	t := a.t(x)
	if a.clamp {
		t = math.Max(-1, math.Min(1, t))
	}
	return ir.EvalPoly(ir.Chebyshev, a.c, t)
}

// slope is the derivative used in training: d/dx Σ c_j T_j(t) =
// (2/(hi − lo)) Σ j c_j U_{j−1}(t), with U the Chebyshev polynomials of the
// second kind (T_j' = j U_{j−1}, a standard identity).
func (a *activation) slope(x float64) float64 {
	if !a.poly {
		if x > 0 {
			return 1
		}
		return 0
	}
	t := a.t(x)
	if a.clamp && (t < -1 || t > 1) {
		return 0
	}
	var d float64
	u0, u1 := 1.0, 2*t // U_0, U_1
	for j := 1; j < len(a.c); j++ {
		d += float64(j) * a.c[j] * u0
		u0, u1 = u1, 2*t*u1-u0
	}
	return d * 2 / (a.hi - a.lo)
}
