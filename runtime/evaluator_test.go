package runtime

import (
	"fmt"
	"math"
	"math/big"
	"sync"
	"testing"

	"github.com/stretchr/testify/require"
)

func nan() float64 { return math.NaN() }

// rotRef is a left rotation of a period-D replicated vector, on its first
// block: slot i of the result is x[(i+k) mod D].
func rotRef(x []float64, k int) []float64 {
	d := len(x)
	out := make([]float64, d)
	for i := range out {
		out[i] = x[((i+k)%d+d)%d]
	}
	return out
}

func TestRotate(t *testing.T) {
	e := getEnv(t, evalEnv)
	const period = 16
	x := randVec(2, period, -1, 1)
	ct := e.encrypt(t, x, period)
	ev := NewEvaluator(e.p, e.evk)
	steps := []int{1, 2, 3, 5, 7, -1, 4, 16, 0, 2048 + 3}
	for _, k := range steps {
		r := ev.Rotate(ct, k)
		require.NoError(t, ev.Err(), "rotate %d", k)
		requireClose(t, rotRef(x, k), e.decrypt(t, r, period), tol, fmt.Sprintf("rotate %d", k))
	}
	hs := ev.RotateHoisted(ct, steps...)
	require.NoError(t, ev.Err())
	require.Len(t, hs, len(steps))
	for i, k := range steps {
		requireClose(t, rotRef(x, k), e.decrypt(t, hs[i], period), tol, fmt.Sprintf("hoisted rotate %d", k))
	}
	// Whole-slot check for one step: slot i holds slot i+5 of the input
	// across block boundaries too.
	all := e.decrypt(t, ev.Rotate(ct, 5), e.p.Slots())
	for i := 0; i < e.p.Slots(); i += 97 {
		require.InDelta(t, x[(i+5)%period], all[i], tol, "slot %d", i)
	}
	// The input is unchanged.
	requireClose(t, x, e.decrypt(t, ct, period), tol, "input untouched")

	// Rotations keep a scale that is not the default one exactly: the
	// rotated square still adds to the square.
	sq := ev.Rescale(ev.Relinearize(ev.Mul(ct, ct)))
	r := ev.RotateHoisted(sq, 3)
	require.NoError(t, ev.Err())
	require.Zero(t, r[0].ct.Scale.Value.Cmp(&sq.ct.Scale.Value))
	sum := ev.Add(ev.Rotate(sq, 3), r[0])
	require.NoError(t, ev.Err())
	want := rotRef(SquareRef(x), 3)
	for i := range want {
		want[i] *= 2
	}
	requireClose(t, want, e.decrypt(t, sum, period), tol, "rotated squares")
}

func TestRecoverTo(t *testing.T) {
	f := func() (err error) {
		defer recoverTo(&err, "op")
		var m map[string]int
		//lint:ignore SA5000 the test provokes a nil-map panic on purpose
		m["x"] = 1 // panics: assignment to entry in nil map
		return nil
	}
	require.ErrorContains(t, f(), "op: internal error in lattigo: assignment to entry in nil map")
	ev := &Evaluator{}
	require.Nil(t, ev.Add(nil, nil))
	require.ErrorContains(t, ev.Err(), "not made by NewEvaluator")
	enc := &Encoder{}
	require.Nil(t, enc.Plaintext("w", 0, Scale{}, 1))
	require.ErrorContains(t, enc.Err(), "not made by NewEncoder")
	var zero Params
	require.Zero(t, zero.Slots())
	_, err := encryptOne(&zero, nil, nil, 1)
	require.ErrorContains(t, err, "not made by NewParams")
}

func TestRotateMissingKey(t *testing.T) {
	e := getEnv(t, evalEnv)
	ct := e.encrypt(t, []float64{1}, 1)
	ev := NewEvaluator(e.p, e.evk)
	require.Nil(t, ev.Rotate(ct, 6))
	require.ErrorContains(t, ev.Err(), "op 1 (rotate 6): no rotation key for step 6")

	ev = NewEvaluator(e.p, e.evk)
	require.Equal(t, []*Ciphertext{nil, nil}, ev.RotateHoisted(ct, 1, 9), "one nil result per step, so that generated code can index them")
	require.ErrorContains(t, ev.Err(), "no rotation key for step 9")

	ev = NewEvaluator(e.p, nil)
	require.Nil(t, ev.Rotate(ct, 1))
	require.ErrorContains(t, ev.Err(), "no evaluation keys loaded")
}

// A plaintext encoded at the scale q_l of the prime the next rescale drops
// makes the product come back to exactly the default scale.
func TestMulPlainRescaleExactScale(t *testing.T) {
	e := getEnv(t, evalEnv)
	const period = 8
	x := randVec(3, period, -1, 1)
	w := randVec(4, period, -2, 2)
	blob, err := BuildWeights([]string{"w"}, [][]float64{w})
	require.NoError(t, err)
	ws, err := ParseWeights(blob, sha256Hex(blob))
	require.NoError(t, err)
	enc := NewEncoder(e.p, ws)
	top := e.p.MaxLevel()
	pt := enc.Plaintext("w", top, Scale{Num: []int{top}}, period)
	require.NoError(t, enc.Err())

	ev := NewEvaluator(e.p, e.evk)
	ct := e.encrypt(t, x, period)
	prod := ev.MulPlain(ct, pt)
	out := ev.Rescale(prod)
	require.NoError(t, ev.Err())
	require.Equal(t, top-1, out.Level())
	def, err := e.p.ScaleValue(e.p.DefaultScale())
	require.NoError(t, err)
	require.Zero(t, out.ct.Scale.Value.Cmp(def), "scale %s, want exactly 2^40", fmtScale(out.ct.Scale))
	want := make([]float64, period)
	for i := range want {
		want[i] = x[i] * w[i]
	}
	requireClose(t, want, e.decrypt(t, out, period), tol, "x*w")

	// The product can then be added to a fresh ciphertext brought to the
	// same level: the scales match exactly.
	sum := ev.Add(out, ev.DropLevel(ct, 1))
	require.NoError(t, ev.Err())
	for i := range want {
		want[i] += x[i]
	}
	requireClose(t, want, e.decrypt(t, sum, period), tol, "x*w + x")

	// MulPlain at a level that does not match is refused.
	pt2 := enc.Plaintext("w", top-1, Scale{Num: []int{top - 1}}, period)
	require.NoError(t, enc.Err())
	require.Nil(t, ev.MulPlain(ct, pt2))
	require.ErrorContains(t, ev.Err(), "levels differ")
}

func TestAddMismatchedScaleIsError(t *testing.T) {
	e := getEnv(t, evalEnv)
	ev := NewEvaluator(e.p, e.evk)
	ct := e.encrypt(t, []float64{1, 2}, 2)
	// Rescaled by q6 then compared with a ciphertext dropped by one level:
	// same level, scales 2^40·2^40/q6 and 2^40 differ.
	sq := ev.Rescale(ev.Relinearize(ev.Mul(ct, ct)))
	dropped := ev.DropLevel(ct, 1)
	require.NoError(t, ev.Err())
	require.Equal(t, sq.Level(), dropped.Level())
	require.Nil(t, ev.Add(sq, dropped))
	require.ErrorContains(t, ev.Err(), "op 5 (add): scales differ")
	// Sticky: later ops do nothing and the first error stays.
	require.Nil(t, ev.Rotate(ct, 1))
	require.ErrorContains(t, ev.Err(), "op 5 (add)")

	ev = NewEvaluator(e.p, e.evk)
	require.Nil(t, ev.Add(ct, dropped))
	require.ErrorContains(t, ev.Err(), "levels differ")

	blob, err := BuildWeights([]string{"b"}, [][]float64{{1, 1}})
	require.NoError(t, err)
	ws, err := ParseWeights(blob, sha256Hex(blob))
	require.NoError(t, err)
	enc := NewEncoder(e.p, ws)
	pt := enc.Plaintext("b", e.p.MaxLevel(), Scale{Pow2: 41}, 2)
	require.NoError(t, enc.Err())
	ev = NewEvaluator(e.p, e.evk)
	require.Nil(t, ev.AddPlain(ct, pt))
	require.ErrorContains(t, ev.Err(), "scales differ")
}

func TestArithmetic(t *testing.T) {
	e := getEnv(t, evalEnv)
	const period = 32
	x := randVec(5, period, -1, 1)
	y := randVec(6, period, -1, 1)
	b := randVec(7, period, -1, 1)
	blob, err := BuildWeights([]string{"b"}, [][]float64{b})
	require.NoError(t, err)
	ws, err := ParseWeights(blob, sha256Hex(blob))
	require.NoError(t, err)
	enc := NewEncoder(e.p, ws)
	ev := NewEvaluator(e.p, e.evk)
	cx, cy := e.encrypt(t, x, period), e.encrypt(t, y, period)

	prod := ev.Mul(cx, cy)
	require.NoError(t, ev.Err())
	require.Equal(t, 2, prod.Degree())
	require.InDelta(t, 80.0, prod.Scale(), 1e-9)
	lin := ev.Relinearize(prod)
	res := ev.Rescale(lin)
	require.NoError(t, ev.Err())
	require.Equal(t, 1, res.Degree())
	// The scale after the rescale is 2^80/q6; a plaintext at that exact
	// scale adds without complaint.
	pt := enc.Plaintext("b", res.Level(), Scale{Pow2: 80, Den: []int{e.p.MaxLevel()}}, period)
	require.NoError(t, enc.Err())
	sum := ev.AddPlain(res, pt)
	require.NoError(t, ev.Err())
	want := make([]float64, period)
	for i := range want {
		want[i] = x[i]*y[i] + b[i]
	}
	requireClose(t, want, e.decrypt(t, sum, period), tol, "x*y + b")
	ev.Expect(sum, e.p.MaxLevel()-1, Scale{Pow2: 80, Den: []int{e.p.MaxLevel()}})
	require.NoError(t, ev.Err())
	// A degree-2 ciphertext decrypts too.
	xy := make([]float64, period)
	for i := range xy {
		xy[i] = x[i] * y[i]
	}
	requireClose(t, xy, e.decrypt(t, prod, period), tol, "degree 2")
	// Degrees 1 and 2 add, in either order, when level and scale match.
	for _, pair := range [][2]*Ciphertext{{prod, lin}, {lin, prod}} {
		s := ev.Relinearize(ev.Add(pair[0], pair[1]))
		require.NoError(t, ev.Err())
		two := make([]float64, period)
		for i := range two {
			two[i] = 2 * xy[i]
		}
		requireClose(t, two, e.decrypt(t, s, period), tol, "degree 1 + degree 2")
	}

	for _, tc := range []struct {
		name string
		run  func(ev *Evaluator)
		msg  string
	}{
		{"rotate degree 2", func(ev *Evaluator) { ev.Rotate(prod, 1) }, "degree-1 ciphertext"},
		{"mul degree 2", func(ev *Evaluator) { ev.Mul(prod, cx) }, "degree-1 ciphertext"},
		{"relinearize degree 1", func(ev *Evaluator) { ev.Relinearize(cx) }, "needs a degree-2"},
		{"rescale level 0", func(ev *Evaluator) { ev.Rescale(ev.DropLevel(cx, e.p.MaxLevel())) }, "level > 0"},
		{"drop too much", func(ev *Evaluator) { ev.DropLevel(cx, 7) }, "cannot drop 7"},
		{"nil input", func(ev *Evaluator) { ev.Add(cx, nil) }, "nil ciphertext"},
		{"nil plaintext", func(ev *Evaluator) { ev.MulPlain(cx, nil) }, "nil plaintext"},
		{"expect level", func(ev *Evaluator) { ev.Expect(cx, 3, e.p.DefaultScale()) }, "at level 6"},
		{"expect scale", func(ev *Evaluator) { ev.Expect(cx, 6, Scale{Pow2: 39}) }, "want 2^39"},
		{"mul levels", func(ev *Evaluator) { ev.Mul(cx, ev.DropLevel(cy, 1)) }, "levels differ"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			ev := NewEvaluator(e.p, e.evk)
			tc.run(ev)
			require.ErrorContains(t, ev.Err(), tc.msg)
		})
	}
	noRelin := NewEvaluator(e.p, nil)
	noRelin.Relinearize(prod)
	require.ErrorContains(t, noRelin.Err(), "no relinearization key")

	var nilEv *Evaluator
	require.Nil(t, nilEv.Add(cx, cy))
	require.Error(t, nilEv.Err())
	require.ErrorContains(t, NewEvaluator(nil, nil).Err(), "nil parameters")
	f := getEnv(t, fileEnv)
	require.ErrorContains(t, NewEvaluator(e.p, f.evk).Err(), "another model")
}

// T_n(cos θ) = cos(nθ): the defining property of Chebyshev polynomials of
// the first kind (any numerical analysis text).
func TestPolyChebyshevClosedForm(t *testing.T) {
	e := getEnv(t, evalEnv)
	const period = 64
	theta := randVec(8, period, 0, math.Pi)
	x := make([]float64, period)
	for i := range x {
		x[i] = math.Cos(theta[i])
	}
	ev := NewEvaluator(e.p, e.evk)
	ct := e.encrypt(t, x, period)
	for _, n := range []int{1, 5, 7} {
		coeffs := make([]float64, n+1)
		coeffs[n] = 1
		poly, err := NewPolynomial(fmt.Sprintf("T%d", n), Chebyshev, coeffs)
		require.NoError(t, err)
		out := ev.Poly(ct, poly, e.p.DefaultScale())
		require.NoError(t, ev.Err())
		want := make([]float64, period)
		for i := range want {
			want[i] = math.Cos(float64(n) * theta[i])
		}
		requireClose(t, want, e.decrypt(t, out, period), tol, fmt.Sprintf("T%d", n))
	}
	// A combination: 0.5·T0 - 0.25·T3 + 0.125·T6 = 0.5 - 0.25cos3θ + 0.125cos6θ.
	poly, err := NewPolynomial("mix", Chebyshev, []float64{0.5, 0, 0, -0.25, 0, 0, 0.125})
	require.NoError(t, err)
	out := ev.Poly(ct, poly, e.p.DefaultScale())
	require.NoError(t, ev.Err())
	want := make([]float64, period)
	for i := range want {
		want[i] = 0.5 - 0.25*math.Cos(3*theta[i]) + 0.125*math.Cos(6*theta[i])
	}
	requireClose(t, want, e.decrypt(t, out, period), tol, "mix")
	requireClose(t, want, PolyRef(Chebyshev, []float64{0.5, 0, 0, -0.25, 0, 0, 0.125}, x), 1e-12, "PolyRef mix")
}

func TestPolyMonomialDirect(t *testing.T) {
	e := getEnv(t, evalEnv)
	const period = 64
	x := randVec(9, period, -1, 1)
	coeffs := []float64{0.1, -0.7, 0.3, 0.25, -0.5, 0.05}
	poly, err := NewPolynomial("p5", Monomial, coeffs)
	require.NoError(t, err)
	ev := NewEvaluator(e.p, e.evk)
	out := ev.Poly(e.encrypt(t, x, period), poly, e.p.DefaultScale())
	require.NoError(t, ev.Err())
	want := make([]float64, period)
	for i, v := range x {
		for k, c := range coeffs {
			want[i] += c * math.Pow(v, float64(k))
		}
	}
	requireClose(t, want, e.decrypt(t, out, period), tol, "monomial degree 5")
}

// Poly consumes exactly ceil(log2(degree+1)) levels and lands exactly on
// the target scale, whatever the degree, basis or trailing zeros.
func TestPolyDepthAndScale(t *testing.T) {
	e := getEnv(t, evalEnv)
	x := randVec(10, 16, -1, 1)
	ct := e.encrypt(t, x, 16)
	top := e.p.MaxLevel()
	for _, tc := range []struct {
		degree int
		depth  int
		basis  Basis
		zeros  int // trailing zero coefficients included in degree
	}{
		{1, 1, Monomial, 0}, {2, 2, Monomial, 0}, {3, 2, Chebyshev, 0}, {4, 3, Monomial, 0},
		{7, 3, Chebyshev, 0}, {8, 4, Chebyshev, 0}, {15, 4, Monomial, 0}, {16, 5, Chebyshev, 0},
		{7, 3, Monomial, 3}, {8, 4, Chebyshev, 5},
	} {
		t.Run(fmt.Sprintf("%v-deg%d-zeros%d", tc.basis, tc.degree, tc.zeros), func(t *testing.T) {
			require.Equal(t, tc.depth, PolyDepth(tc.degree))
			coeffs := randVec(uint64(tc.degree), tc.degree+1, -0.5, 0.5)
			for i := 0; i < tc.zeros; i++ {
				coeffs[tc.degree-i] = 0
			}
			poly, err := NewPolynomial("p", tc.basis, coeffs)
			require.NoError(t, err)
			target := Scale{Pow2: 40}
			ev := NewEvaluator(e.p, e.evk)
			out := ev.Poly(ct, poly, target)
			require.NoError(t, ev.Err())
			require.Equal(t, top-tc.depth, out.Level(), "levels consumed")
			tv, err := e.p.ScaleValue(target)
			require.NoError(t, err)
			require.Zero(t, out.ct.Scale.Value.Cmp(tv))
			requireClose(t, PolyRef(tc.basis, coeffs, x), e.decrypt(t, out, 16), tol, "value")
		})
	}
	// Not enough levels, no relinearization key, nil polynomial.
	low := NewEvaluator(e.p, e.evk)
	p15, err := NewPolynomial("p15", Monomial, randVec(1, 16, -1, 1))
	require.NoError(t, err)
	low.Poly(low.DropLevel(ct, top-3), p15, e.p.DefaultScale())
	require.ErrorContains(t, low.Err(), "degree 15 needs 4 levels")
	norelin := NewEvaluator(e.p, nil)
	norelin.Poly(ct, p15, e.p.DefaultScale())
	require.ErrorContains(t, norelin.Err(), "no relinearization key")
	ev := NewEvaluator(e.p, e.evk)
	ev.Poly(ct, nil, e.p.DefaultScale())
	require.ErrorContains(t, ev.Err(), "nil polynomial")
	_, err = NewPolynomial("c", Monomial, []float64{1})
	require.Error(t, err)
	_, err = NewPolynomial("b", Basis(0), []float64{1, 2})
	require.Error(t, err)
	ev = NewEvaluator(e.p, e.evk)
	zero, err := NewPolynomial("z", Monomial, []float64{1, 0, 0})
	require.NoError(t, err)
	ev.Poly(ct, zero, e.p.DefaultScale())
	require.ErrorContains(t, ev.Err(), "constant")
}

func TestShallowCopyConcurrent(t *testing.T) {
	e := getEnv(t, evalEnv)
	x := randVec(11, 8, -1, 1)
	ct := e.encrypt(t, x, 8)
	ev := NewEvaluator(e.p, e.evk)
	outs := make([]*Ciphertext, 4)
	errs := make([]error, 4)
	var wg sync.WaitGroup
	for i := range outs {
		wg.Add(1)
		go func() {
			defer wg.Done()
			c := ev.ShallowCopy()
			outs[i] = c.Rotate(ct, i+1)
			errs[i] = c.Err()
		}()
	}
	wg.Wait()
	for i := range outs {
		require.NoError(t, errs[i])
		requireClose(t, rotRef(x, i+1), e.decrypt(t, outs[i], 8), tol, fmt.Sprintf("goroutine %d", i))
	}
}

// The scale helpers see through lattigo's 128-bit rounding but not across
// two different primes.
func TestSameScale(t *testing.T) {
	e := getEnv(t, evalEnv)
	a, err := e.p.rlweScale(Scale{Pow2: 40, Num: []int{5}, Den: []int{5}})
	require.NoError(t, err)
	b, err := e.p.rlweScale(Scale{Pow2: 40})
	require.NoError(t, err)
	c, err := e.p.rlweScale(Scale{Pow2: 0, Num: []int{5}})
	require.NoError(t, err)
	require.True(t, sameScale(a, b))
	require.False(t, sameScale(b, c))
	d := b
	d.Value = *new(big.Float).SetPrec(128).Mul(&b.Value, big.NewFloat(1+math.Ldexp(1, -50)))
	require.False(t, sameScale(b, d))
}
