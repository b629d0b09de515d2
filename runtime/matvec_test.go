package runtime

import (
	"fmt"
	"math/rand/v2"
	"sync"
	"testing"

	"github.com/stretchr/testify/require"
)

// A matrix-vector shaped workload in the style of generated code, for the
// parallel evaluator's tests and benchmarks: y = W2·(W1·x)², each product
// by baby-step giant-step over the n diagonals of an n×n matrix (n1 baby
// steps sharing one hoisted decomposition, n/n1 giant steps), as the
// planner lowers a dense layer (passes/lower.go).

// mvSetup is a parameter set with the keys the workload needs.
type mvSetup struct {
	p      *Params
	sk     *SecretKey
	evk    *EvaluationKeys
	n, n1  int
	w1, w2 [][]float64
	pt1    []*Plaintext // W1's diagonals, pre-rotated for the giant steps, at level 3
	pt2    []*Plaintext // W2's, at level 1
}

var mvSetups struct {
	sync.Mutex
	m map[int]*mvSetup
	e map[int]error
}

// getMV builds (once per ring degree) the workload with n = 64, n1 = 8 at
// ring degree 2^logN: four ciphertext primes, one key-switching prime.
func getMV(t testing.TB, logN int) *mvSetup {
	t.Helper()
	mvSetups.Lock()
	defer mvSetups.Unlock()
	if mvSetups.m == nil {
		mvSetups.m, mvSetups.e = map[int]*mvSetup{}, map[int]error{}
	}
	s, ok := mvSetups.m[logN]
	if !ok {
		var err error
		s, err = newMV(logN, 64, 8)
		mvSetups.m[logN], mvSetups.e[logN] = s, err
	}
	require.NoError(t, mvSetups.e[logN])
	return s
}

func newMV(logN, n, n1 int) (*mvSetup, error) {
	q, pp, err := GeneratePrimes(logN, []int{55, 40, 40, 40}, []int{56})
	if err != nil {
		return nil, err
	}
	p, err := NewParams(ParamSpec{LogN: logN, Q: q, P: pp, LogScale: 40, ModelID: fmt.Sprintf("matvec-%d", logN)})
	if err != nil {
		return nil, err
	}
	var steps []int
	for b := 1; b < n1; b++ {
		steps = append(steps, b)
	}
	for g := n1; g < n; g += n1 {
		steps = append(steps, g)
	}
	sk, evk, err := GenerateKeys(p, KeyRequest{Rotations: steps, Relinearize: true})
	if err != nil {
		return nil, err
	}
	s := &mvSetup{p: p, sk: sk, evk: evk, n: n, n1: n1}
	r := rand.New(rand.NewPCG(7, 11))
	matrix := func() [][]float64 {
		m := make([][]float64, n)
		for i := range m {
			m[i] = make([]float64, n)
			for j := range m[i] {
				m[i][j] = (2*r.Float64() - 1) / float64(n) * 4
			}
		}
		return m
	}
	s.w1, s.w2 = matrix(), matrix()
	var names []string
	var vecs [][]float64
	for k, w := range [][][]float64{s.w1, s.w2} {
		for d := 0; d < n; d++ {
			// diag_d[i] = W[i][i+d], rotated right by the giant step g·n1
			// so that it can be applied before the giant rotation.
			g := d / n1 * n1
			v := make([]float64, n)
			for i := range v {
				src := ((i-g)%n + n) % n
				v[i] = w[src][(src+d)%n]
			}
			names = append(names, fmt.Sprintf("w%d.%d", k+1, d))
			vecs = append(vecs, v)
		}
	}
	blob, err := BuildWeights(names, vecs)
	if err != nil {
		return nil, err
	}
	ws, err := decodeWeights(blob)
	if err != nil {
		return nil, err
	}
	enc := NewEncoder(p, ws)
	for d := 0; d < n; d++ {
		s.pt1 = append(s.pt1, enc.Plaintext(names[d], 3, Scale{Num: []int{3}}, n))
		s.pt2 = append(s.pt2, enc.Plaintext(names[n+d], 1, Scale{Num: []int{1}}, n))
	}
	return s, enc.Err()
}

// mvOps are the Evaluator methods the workload calls (an interface, so
// that a recorder can stand in; see schedule_model_test.go).
type mvOps interface {
	RotateHoisted(ct *Ciphertext, steps ...int) []*Ciphertext
	Rotate(ct *Ciphertext, step int) *Ciphertext
	MulPlain(ct *Ciphertext, pt *Plaintext) *Ciphertext
	Add(a, b *Ciphertext) *Ciphertext
	Mul(a, b *Ciphertext) *Ciphertext
	Relinearize(ct *Ciphertext) *Ciphertext
	Rescale(ct *Ciphertext) *Ciphertext
	Err() error
}

// dense multiplies ct by the matrix whose pre-rotated diagonals are pts.
func (s *mvSetup) dense(ev mvOps, ct *Ciphertext, pts []*Plaintext) *Ciphertext {
	steps := make([]int, s.n1-1)
	for b := range steps {
		steps[b] = b + 1
	}
	baby := append([]*Ciphertext{ct}, ev.RotateHoisted(ct, steps...)...)
	var acc *Ciphertext
	for g := 0; g < s.n; g += s.n1 {
		var block *Ciphertext
		for b := 0; b < s.n1; b++ {
			prod := ev.MulPlain(baby[b], pts[g+b])
			if block == nil {
				block = prod
			} else {
				block = ev.Add(block, prod)
			}
		}
		if g > 0 {
			block = ev.Rotate(block, g)
		}
		if acc == nil {
			acc = block
		} else {
			acc = ev.Add(acc, block)
		}
	}
	return ev.Rescale(acc)
}

// evaluate runs the workload on x as generated code would: every op, then
// Err once.
func (s *mvSetup) evaluate(ev mvOps, x *Ciphertext) (*Ciphertext, error) {
	y := s.dense(ev, x, s.pt1)
	sq := ev.Rescale(ev.Relinearize(ev.Mul(y, y)))
	out := s.dense(ev, sq, s.pt2)
	return out, ev.Err()
}

// reference is the workload in float64.
func (s *mvSetup) reference(x []float64) []float64 {
	mul := func(w [][]float64, v []float64) []float64 {
		out := make([]float64, len(w))
		for i := range w {
			for j := range v {
				out[i] += w[i][j] * v[j]
			}
		}
		return out
	}
	y := mul(s.w1, x)
	for i := range y {
		y[i] *= y[i]
	}
	return mul(s.w2, y)
}
