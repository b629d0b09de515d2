package passes

import (
	"math"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
)

// The degrees offered for a tolerance: each meets it, each is the smallest
// that does with its levels, and the levels grow.
func TestDegreeOptions(t *testing.T) {
	for _, tc := range []struct {
		f      ir.ActFunc
		lo, hi float64
		tol    float64
	}{
		{ir.ReLU, -3, 3, 0.1}, {ir.ReLU, -1, 1, 0.01}, {ir.Sigmoid, -4, 4, 1e-3}, {ir.Tanh, -2, 2, 1e-4}, {ir.Sigmoid, -8, 8, 0.05},
	} {
		f := Func(tc.f)
		opts, _ := degreeOptions(f, tc.lo, tc.hi, tc.tol)
		require.NotEmpty(t, opts, "%s on [%g, %g]", tc.f, tc.lo, tc.hi)
		for i, o := range opts {
			require.LessOrEqual(t, o.MaxErr, tc.tol)
			require.Equal(t, o.Levels, ir.PolyDepth(len(o.Coeffs)-1))
			if i > 0 {
				require.Greater(t, o.Levels, opts[i-1].Levels)
			}
			for d := 1 << (o.Levels - 1); d < o.Degree; d++ { // smaller degrees with as many levels fail
				c := trimCoeffs(ChebyshevInterpolant(f, tc.lo, tc.hi, d))
				if ir.PolyDepth(len(c)-1) == o.Levels {
					require.Greater(t, approxError(f, c, tc.lo, tc.hi), tc.tol, "degree %d", d)
				}
			}
		}
	}
}

// Interpolation at d+1 Chebyshev nodes reproduces a polynomial of degree
// at most d exactly (common practice; Trefethen, Approximation Theory and
// Approximation Practice, ch. 4, from memory): x³ − 2x on [−2, 3] is offered
// at degree 3 (2 levels) with a rounding-size error, never at degree 2.
func TestDegreeOptionsReproducePolynomial(t *testing.T) {
	f := func(x float64) float64 { return x*x*x - 2*x }
	opts, _ := degreeOptions(f, -2, 3, 1e-9)
	require.NotEmpty(t, opts)
	require.Equal(t, 3, opts[0].Degree)
	require.Equal(t, 2, opts[0].Levels)
	require.Less(t, opts[0].MaxErr, 1e-12)
}

// The measured error of relu's interpolant against the best uniform
// approximation of |x| on [−1, 1] (relu = (x + |x|)/2): Bernstein's
// constant β = lim 2n·E_2n(|x|) ≈ 0.2802, approached from below from
// 2·E_2 = 1/4 (Bernstein 1914; Varga and Carpenter 1985; both from memory).
// No polynomial beats the best one, so the error is at least E_m/2 with m
// the even degree at or below the interpolant's; interpolation at Chebyshev
// nodes is within 1 + Λ_d of best, Λ_d ≤ 1 + (2/π)ln(d+1) (Rivlin, from
// memory). An error measured on too few points would fall below the floor.
func TestReLUErrorAgainstBernstein(t *testing.T) {
	f := Func(ir.ReLU)
	for _, d := range []int{4, 8, 15, 16, 31, 32, 63} {
		c := trimCoeffs(ChebyshevInterpolant(f, -1, 1, d))
		m := len(c) - 1
		m -= m % 2
		e := approxError(f, c, -1, 1)
		require.GreaterOrEqual(t, e, 0.25/float64(m)/2, "degree %d: below the best approximation", d)
		lebesgue := 1 + 2/math.Pi*math.Log(float64(d+1))
		require.LessOrEqual(t, e, (1+lebesgue)*0.2802/float64(m)/2, "degree %d: far from the best approximation", d)
	}
}

// A tolerance no degree up to 63 meets is an error naming the layer and
// what the best degree reaches; with a reachable one the approximate pass
// takes the shallowest offer, or the one the options ask for.
func TestApproximateToTolerance(t *testing.T) {
	graph := func(tol float64) *ir.Graph {
		return &ir.Graph{Name: "tol", SpecFile: "tol.yaml", Input: ir.Input{Name: "x", Size: 4, Min: -1, Max: 1}, OutputName: "y", Precision: 12,
			Layers: []*ir.Layer{short("d", 4, 4, 5),
				{Name: "act", Kind: ir.Activation, In: 4, Out: 4, Pos: ir.Pos{File: "tol.yaml", Line: 9, Col: 5},
					Act: &ir.Act{Func: ir.Tanh, Interval: [2]float64{-8, 8}, Tolerance: tol}}}}
	}
	_, _, err := Compile(graph(1e-9), Options{})
	require.ErrorContains(t, err, "tol.yaml:9:5: act: no interpolant of degree up to 63 meets tolerance 1e-09 for tanh on [-8, 8] (the closest reaches")

	_, st, err := Compile(graph(1e-2), Options{})
	require.NoError(t, err)
	offers := st.Report.Degrees["act"]
	require.GreaterOrEqual(t, len(offers), 2)
	require.Equal(t, offers[0].Coeffs, st.Model.Layers[1].Act.Coeffs)

	_, st, err = Compile(graph(1e-2), Options{Degree: map[string]int{"act": offers[1].Degree}})
	require.NoError(t, err)
	require.Equal(t, offers[1].Coeffs, st.Model.Layers[1].Act.Coeffs)

	_, _, err = Compile(graph(1e-2), Options{Degree: map[string]int{"act": 2}})
	require.ErrorContains(t, err, "degree 2 is not among those that meet tolerance")
}
