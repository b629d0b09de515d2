package passes

import (
	"fmt"
	"math"

	"github.com/lanthorn/lanthorn/ir"
)

// Default interpolant degrees when a spec declares none. Degrees 2^k-1 use
// their levels fully: degree d costs ceil(log2(d+1)) levels.
var defaultDegree = map[ir.ActFunc]int{ir.ReLU: 15, ir.Sigmoid: 7, ir.Tanh: 7}

// approximate replaces every relu, sigmoid and tanh by its Chebyshev
// interpolant of the declared degree over the declared interval, and records
// the largest deviation from the function on a fine grid.
func approximate(s *State) error {
	for _, l := range s.Graph.Layers {
		a := l.Act
		if l.Kind != ir.Activation || a.Func == ir.Square || a.Func == ir.Poly {
			continue
		}
		f := Func(a.Func)
		if f == nil {
			return fmt.Errorf("%s: %s: no approximation for %q", l.Pos, l.Name, a.Func)
		}
		lo, hi := a.Interval[0], a.Interval[1]
		if !(lo < hi) || math.IsInf(lo, 0) || math.IsInf(hi, 0) {
			return fmt.Errorf("%s: %s: interval [%g, %g] is empty", l.Pos, l.Name, lo, hi)
		}
		if a.Tolerance > 0 {
			if err := approximateToTolerance(s, l, f); err != nil {
				return err
			}
			continue
		}
		if a.Degree == 0 {
			a.Degree = defaultDegree[a.Func]
		}
		a.Coeffs = trimCoeffs(ChebyshevInterpolant(f, lo, hi, a.Degree))
		a.Basis = ir.Chebyshev
		s.note("%s: %s on [%g, %g] by a Chebyshev interpolant of degree %d (%d levels), max error %.2e",
			l.Name, a.Func, lo, hi, len(a.Coeffs)-1, ir.PolyDepth(len(a.Coeffs)-1), MaxDeviation(f, a.Coeffs, lo, hi))
	}
	return nil
}

// Func returns the exact activation function, or nil for square and poly.
func Func(name ir.ActFunc) func(float64) float64 {
	switch name {
	case ir.ReLU:
		return func(x float64) float64 { return math.Max(x, 0) }
	case ir.Sigmoid:
		return func(x float64) float64 { return 1 / (1 + math.Exp(-x)) }
	case ir.Tanh:
		return math.Tanh
	}
	return nil
}

// ChebyshevInterpolant returns c_0..c_d such that Σ c_j T_j(t), with
// t = (2x - lo - hi)/(hi - lo), interpolates f at the d+1 Chebyshev nodes of
// the first kind: c_j = (2/(d+1)) Σ_k f(x_k) T_j(t_k), with c_0 halved
// (common practice; e.g. Trefethen, Approximation Theory and Approximation
// Practice, ch. 4, from memory).
func ChebyshevInterpolant(f func(float64) float64, lo, hi float64, d int) []float64 {
	n := d + 1
	fx := make([]float64, n)
	theta := make([]float64, n)
	for k := range n {
		theta[k] = math.Pi * (float64(k) + 0.5) / float64(n)
		t := math.Cos(theta[k])
		fx[k] = f(lo + (hi-lo)*(t+1)/2)
	}
	c := make([]float64, n)
	for j := range n {
		var sum float64
		for k := range n {
			sum += fx[k] * math.Cos(float64(j)*theta[k]) // T_j(cos θ) = cos(jθ)
		}
		c[j] = 2 * sum / float64(n)
	}
	c[0] /= 2
	return c
}

// MaxDeviation is the largest |f(x) - p(x)| on 4096 evenly spaced points of
// [lo, hi], p given by Chebyshev coefficients over that interval.
func MaxDeviation(f func(float64) float64, coeffs []float64, lo, hi float64) float64 {
	var worst float64
	const n = 4096
	for i := 0; i <= n; i++ {
		x := lo + (hi-lo)*float64(i)/n
		t := (2*x - lo - hi) / (hi - lo)
		worst = math.Max(worst, math.Abs(f(x)-ir.EvalPoly(ir.Chebyshev, coeffs, t)))
	}
	return worst
}

// trimCoeffs drops leading coefficients that are rounding noise (an odd
// function's even terms, say), so they cost no level.
func trimCoeffs(c []float64) []float64 {
	var big float64
	for _, v := range c {
		big = math.Max(big, math.Abs(v))
	}
	n := len(c)
	for n > 2 && math.Abs(c[n-1]) <= 1e-13*big {
		n--
	}
	return c[:n]
}
