package runtime

import (
	"errors"
	"fmt"
	"math"
	"math/bits"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
	"github.com/tuneinsight/lattigo/v5/utils/bignum"
)

// PolyDepth returns the number of levels Evaluator.Poly consumes for a
// polynomial of the given degree: ceil(log2(degree+1)).
func PolyDepth(degree int) int {
	if degree < 1 {
		return 0
	}
	return bits.Len(uint(degree))
}

// polyScaleTolerance is how far lattigo's result scale may be from the
// target before Poly refuses it. lattigo aims at the target exactly; the
// slack covers its rounding when it picks intermediate scales.
var polyScaleTolerance = math.Ldexp(1, -30)

// Poly evaluates poly on every slot of ct with lattigo's polynomial
// evaluator (baby-step giant-step Paterson–Stockmeyer; it needs the
// relinearization key for degree ≥ 2). It consumes exactly
// PolyDepth(poly.Degree()) levels. Chebyshev polynomials are on [-1, 1] and
// the slots must lie there; no level is spent on a change of variable. The
// result's scale is checked to be within 2^-30 relative of target and then
// set to exactly target.
func (e *Evaluator) Poly(ct *Ciphertext, poly *Polynomial, target Scale) *Ciphertext {
	name := func() string {
		if poly == nil {
			return "poly <nil>"
		}
		return fmt.Sprintf("poly %q (%v, degree %d)", poly.name, poly.basis, poly.Degree())
	}
	return e.do(name, []*Ciphertext{ct}, func(l *lane) (*rlwe.Ciphertext, error) {
		if err := e.check(ct); err != nil {
			return nil, err
		}
		if poly == nil {
			return nil, errors.New("nil polynomial")
		}
		if err := degreeOne(ct, "a polynomial"); err != nil {
			return nil, err
		}
		degree := poly.Degree()
		depth := PolyDepth(degree)
		if ct.Level() < depth {
			return nil, fmt.Errorf("degree %d needs %d levels, ciphertext is at level %d", degree, depth, ct.Level())
		}
		want := ct.Level() - depth
		// Trailing zero coefficients are dropped: lattigo evaluates the
		// shorter polynomial and the result is then lowered to the level
		// the declared degree implies, so the plan's levels hold.
		coeffs := poly.coeffs
		for len(coeffs) > 1 && coeffs[len(coeffs)-1] == 0 {
			coeffs = coeffs[:len(coeffs)-1]
		}
		if len(coeffs) < 2 {
			return nil, errors.New("the polynomial is constant")
		}
		if len(coeffs) > 2 && !e.keys.HasRelinearization() {
			return nil, errors.New("no relinearization key loaded, and a polynomial of degree ≥ 2 needs one")
		}
		targetScale, err := e.p.rlweScale(target)
		if err != nil {
			return nil, err
		}
		basis := bignum.Monomial
		if poly.basis == Chebyshev {
			basis = bignum.Chebyshev
		}
		bp := bignum.NewPolynomial(basis, coeffs, [2]float64{-1, 1})
		// lattigo keeps the input as the first power of its power basis;
		// it gets a copy so that ct stays untouched.
		out, err := l.poly.Evaluate(ct.ct.CopyNew(), bp, targetScale)
		if err != nil {
			return nil, err
		}
		if out.Degree() != 1 {
			return nil, fmt.Errorf("lattigo returned a degree-%d result", out.Degree())
		}
		if out.Level() < want {
			return nil, fmt.Errorf("lattigo consumed %d levels, want %d", ct.Level()-out.Level(), depth)
		}
		if out.Level() > want {
			l.ev.DropLevel(out, out.Level()-want)
		}
		if d := relDiff(&out.Scale.Value, &targetScale.Value); !(d <= polyScaleTolerance) {
			return nil, fmt.Errorf("result scale %s is %.3g away from the target %s (relative), more than 2^-30", fmtScale(out.Scale), d, fmtScale(targetScale))
		}
		out.Scale = targetScale
		return out, nil
	})
}
