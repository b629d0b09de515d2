package runtime

import (
	"fmt"
	"math"
)

// Reference evaluates a model in float64 from the weights blob, layer by
// layer, keeping the first error (generated reference code checks it once).
type Reference struct {
	w   *Weights
	err error
}

// NewReference returns a reference evaluator over the weights.
func NewReference(w *Weights) *Reference { return &Reference{w: w} }

// Err returns the first error met.
func (r *Reference) Err() error { return r.err }

func (r *Reference) fail(err error) []float64 {
	if r.err == nil {
		r.err = err
	}
	return nil
}

// Input checks the input length.
func (r *Reference) Input(x []float64, n int) {
	if r.err == nil && len(x) != n {
		r.fail(fmt.Errorf("input has %d values, model takes %d", len(x), n))
	}
}

// Dense returns W·x + b with W (out×in, row-major) and b from the blob.
func (r *Reference) Dense(x []float64, weights, bias string, out, in int) []float64 {
	if r.err != nil {
		return nil
	}
	if len(x) != in {
		return r.fail(fmt.Errorf("dense %s: input of %d, want %d", weights, len(x), in))
	}
	w, err := r.w.Matrix(weights, out, in)
	if err != nil {
		return r.fail(err)
	}
	b, err := r.w.Vector(bias)
	if err != nil {
		return r.fail(err)
	}
	if len(b) != out {
		return r.fail(fmt.Errorf("%s: %d values, want %d", bias, len(b), out))
	}
	y, err := DenseRef(w, b, x)
	if err != nil {
		return r.fail(err)
	}
	return y
}

// Square squares every value.
func (r *Reference) Square(x []float64) []float64 {
	return r.Apply(x, func(v float64) float64 { return v * v })
}

// Apply applies f to every value.
func (r *Reference) Apply(x []float64, f func(float64) float64) []float64 {
	if r.err != nil {
		return nil
	}
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = f(v)
	}
	return y
}

// Chebyshev evaluates Σ c_j T_j(t), t = (2x − lo − hi)/(hi − lo), with the
// coefficients from the blob.
func (r *Reference) Chebyshev(x []float64, coeffs string, lo, hi float64) []float64 {
	if r.err != nil {
		return nil
	}
	c, err := r.w.Vector(coeffs)
	if err != nil {
		return r.fail(err)
	}
	t := make([]float64, len(x))
	for i, v := range x {
		t[i] = (2*v - lo - hi) / (hi - lo)
	}
	return PolyRef(Chebyshev, c, t)
}

// Monomial evaluates c0 + c1 x + c2 x² + … with the coefficients from the blob.
func (r *Reference) Monomial(x []float64, coeffs string) []float64 {
	if r.err != nil {
		return nil
	}
	c, err := r.w.Vector(coeffs)
	if err != nil {
		return r.fail(err)
	}
	return PolyRef(Monomial, c, x)
}

// ReLU is max(x, 0).
func ReLU(x float64) float64 { return math.Max(x, 0) }

// Sigmoid is 1/(1 + e^-x).
func Sigmoid(x float64) float64 { return 1 / (1 + math.Exp(-x)) }

// Tanh is the hyperbolic tangent.
func Tanh(x float64) float64 { return math.Tanh(x) }
