package runtime

import (
	"fmt"
	"math"
)

// Float64 reference helpers: the same model in plain float64, used by the
// emitted reference.go and by tests to check encrypted results.

// DenseRef returns w·x + b for a matrix w of len(b) rows and len(x)
// columns.
func DenseRef(w [][]float64, b []float64, x []float64) ([]float64, error) {
	if len(w) != len(b) {
		return nil, fmt.Errorf("dense: %d weight rows, %d biases", len(w), len(b))
	}
	y := make([]float64, len(w))
	for i, row := range w {
		if len(row) != len(x) {
			return nil, fmt.Errorf("dense: weight row %d has %d columns, input has %d values", i, len(row), len(x))
		}
		s := b[i]
		for j, v := range row {
			s += v * x[j]
		}
		y[i] = s
	}
	return y, nil
}

// PolyRef evaluates the polynomial with coefficients coeffs (c0 first) in
// the given basis at every x: Horner's rule for the monomial basis,
// Clenshaw's recurrence for the Chebyshev basis (on [-1, 1], no change of
// variable). An invalid basis yields NaN.
func PolyRef(basis Basis, coeffs []float64, x []float64) []float64 {
	y := make([]float64, len(x))
	for i, t := range x {
		switch basis {
		case Monomial:
			var s float64
			for k := len(coeffs) - 1; k >= 0; k-- {
				s = s*t + coeffs[k]
			}
			y[i] = s
		case Chebyshev:
			// b_k = c_k + 2t·b_{k+1} - b_{k+2}; p(t) = c_0 + t·b_1 - b_2.
			var b1, b2 float64
			for k := len(coeffs) - 1; k >= 1; k-- {
				b1, b2 = coeffs[k]+2*t*b1-b2, b1
			}
			if len(coeffs) > 0 {
				y[i] = coeffs[0] + t*b1 - b2
			}
		default:
			y[i] = math.NaN()
		}
	}
	return y
}

func mapRef(x []float64, f func(float64) float64) []float64 {
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = f(v)
	}
	return y
}

// SquareRef returns x² slot-wise.
func SquareRef(x []float64) []float64 { return mapRef(x, func(v float64) float64 { return v * v }) }

// ReLURef returns max(x, 0) slot-wise.
func ReLURef(x []float64) []float64 {
	return mapRef(x, func(v float64) float64 { return math.Max(v, 0) })
}

// SigmoidRef returns 1/(1+e^-x) slot-wise.
func SigmoidRef(x []float64) []float64 {
	return mapRef(x, func(v float64) float64 { return 1 / (1 + math.Exp(-v)) })
}

// TanhRef returns tanh(x) slot-wise.
func TanhRef(x []float64) []float64 { return mapRef(x, math.Tanh) }
