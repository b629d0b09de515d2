package runtime

import "testing"

// Benchmarks of the evaluator ops at the test parameters (LogN 12, 7
// levels). They measure, they do not assert: speed goals live here, not in
// tests. Run with: go test ./runtime -run '^$' -bench . -benchtime 20x

func benchSetup(b *testing.B) (*testEnv, *Evaluator, *Ciphertext) {
	e := getEnv(b, evalEnv)
	ct, err := encryptOne(e.p, e.sk, randVec(1, 64, -1, 1), 64)
	if err != nil {
		b.Fatal(err)
	}
	return e, NewEvaluator(e.p, e.evk), ct
}

func BenchmarkRotate(b *testing.B) {
	_, ev, ct := benchSetup(b)
	for b.Loop() {
		ev.Rotate(ct, 3)
	}
	if err := ev.Err(); err != nil {
		b.Fatal(err)
	}
}

func BenchmarkRotateHoisted4(b *testing.B) {
	_, ev, ct := benchSetup(b)
	for b.Loop() {
		ev.RotateHoisted(ct, 1, 2, 3, 5)
	}
	if err := ev.Err(); err != nil {
		b.Fatal(err)
	}
}

func BenchmarkMulRelinRescale(b *testing.B) {
	_, ev, ct := benchSetup(b)
	for b.Loop() {
		ev.Rescale(ev.Relinearize(ev.Mul(ct, ct)))
	}
	if err := ev.Err(); err != nil {
		b.Fatal(err)
	}
}

func BenchmarkPolyDegree7(b *testing.B) {
	e, ev, ct := benchSetup(b)
	poly, err := NewPolynomial("p7", Chebyshev, randVec(2, 8, -0.5, 0.5))
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		ev.Poly(ct, poly, e.p.DefaultScale())
	}
	if err := ev.Err(); err != nil {
		b.Fatal(err)
	}
}
