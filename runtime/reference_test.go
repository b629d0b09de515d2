package runtime

import (
	"math"
	"testing"

	"github.com/stretchr/testify/require"
	"gonum.org/v1/gonum/mat"
)

// DenseRef against gonum's matrix-vector product (a general-purpose
// linear-algebra library).
func TestDenseRefAgainstGonum(t *testing.T) {
	const rows, cols = 7, 11
	flat := randVec(30, rows*cols, -1, 1)
	b := randVec(31, rows, -1, 1)
	x := randVec(32, cols, -2, 2)
	w := make([][]float64, rows)
	for i := range w {
		w[i] = flat[i*cols : (i+1)*cols]
	}
	have, err := DenseRef(w, b, x)
	require.NoError(t, err)
	var want mat.VecDense
	want.MulVec(mat.NewDense(rows, cols, flat), mat.NewVecDense(cols, x))
	want.AddVec(&want, mat.NewVecDense(rows, b))
	for i := range have {
		require.InDelta(t, want.AtVec(i), have[i], 1e-12)
	}
	_, err = DenseRef(w, b[:3], x)
	require.ErrorContains(t, err, "7 weight rows, 3 biases")
	_, err = DenseRef(w, b, x[:4])
	require.ErrorContains(t, err, "weight row 0 has 11 columns, input has 4")
}

// Clenshaw's recurrence against T_n(cos θ) = cos(nθ), and Horner against
// explicit powers.
func TestPolyRef(t *testing.T) {
	theta := randVec(33, 50, 0, math.Pi)
	x := make([]float64, len(theta))
	for i := range x {
		x[i] = math.Cos(theta[i])
	}
	for n := 0; n <= 12; n++ {
		coeffs := make([]float64, n+1)
		coeffs[n] = 1
		have := PolyRef(Chebyshev, coeffs, x)
		for i := range x {
			require.InDelta(t, math.Cos(float64(n)*theta[i]), have[i], 1e-12, "T%d", n)
		}
	}
	coeffs := []float64{1, -2, 0.5, 3}
	have := PolyRef(Monomial, coeffs, []float64{-1.5, 0, 2})
	for i, v := range []float64{-1.5, 0, 2} {
		want := coeffs[0] + coeffs[1]*v + coeffs[2]*v*v + coeffs[3]*v*v*v
		require.InDelta(t, want, have[i], 1e-12)
	}
	require.True(t, math.IsNaN(PolyRef(Basis(0), coeffs, []float64{1})[0]))
	require.Equal(t, []float64{0}, PolyRef(Chebyshev, nil, []float64{0.3}))
}

func TestActivationRefs(t *testing.T) {
	x := []float64{-3, -0.5, 0, 0.5, 3}
	require.Equal(t, []float64{9, 0.25, 0, 0.25, 9}, SquareRef(x))
	require.Equal(t, []float64{0, 0, 0, 0.5, 3}, ReLURef(x))
	s := SigmoidRef(x)
	th := TanhRef(x)
	for i := range x {
		// σ(x) + σ(-x) = 1, tanh(x) = 2σ(2x) - 1 (identities of the logistic
		// function; common practice).
		require.InDelta(t, 1, s[i]+SigmoidRef([]float64{-x[i]})[0], 1e-15)
		require.InDelta(t, 2*SigmoidRef([]float64{2 * x[i]})[0]-1, th[i], 1e-15)
	}
	require.Equal(t, 0.5, s[2])
}

func TestCompare(t *testing.T) {
	p := Compare([]float64{1, 2, 3}, []float64{1, 2.5, 2.75})
	require.Equal(t, 0.5, p.MaxAbsErr)
	require.InDelta(t, 0.25, p.MeanAbsErr, 1e-15)
	require.Equal(t, 1.0, p.Bits)
	require.True(t, math.IsInf(Compare([]float64{1, 2}, []float64{1}).MaxAbsErr, 1))
	require.True(t, math.IsInf(Compare([]float64{1}, []float64{math.NaN()}).MaxAbsErr, 1))
	require.True(t, math.IsInf(Compare(nil, nil).Bits, 1))
}
