package runtime

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"math/rand/v2"
	"slices"
	"time"
)

// OpTiming is the median time of each primitive at one ring degree and
// level, in nanoseconds, as the evaluator runs it (checks included).
type OpTiming struct {
	LogN, Level int
	Specials    int     // primes in the special modulus P of the parameters measured
	Add         float64 // ciphertext + ciphertext
	MulPlain    float64 // ciphertext × plaintext, no rescale
	MulRelin    float64 // ciphertext × ciphertext, then relinearize
	Rescale     float64
	Rotate      float64 // one rotation: a full key switch
	Hoisted     float64 // RotateHoisted with HoistedSteps steps, all together
	RotSum      float64 // RotateSum of HoistedSteps rotated terms, all together
	Dot         float64 // DotPlain of HoistedSteps products (Multiplier plaintexts), all together
	Encode      float64 // encoding one plaintext vector at this level
}

// HoistedSteps is the number of rotations MeasureOps hoists together.
const HoistedSteps = 4

// MeasureOps times the evaluator's primitives at each of the levels, with
// parameters of ring degree 2^logN and primes of the given bit sizes. Each
// figure is the median of reps runs.
func MeasureOps(logN int, logQ, logP []int, levels []int, reps int) (out []OpTiming, err error) {
	defer recoverTo(&err, "measure")
	if reps < 1 {
		return nil, errors.New("measure: reps must be at least 1")
	}
	q, pp, err := GeneratePrimes(logN, logQ, logP)
	if err != nil {
		return nil, err
	}
	p, err := NewParams(ParamSpec{LogN: logN, Q: q, P: pp, LogScale: logQ[len(logQ)-1], ModelID: "calibrate"})
	if err != nil {
		return nil, err
	}
	steps := []int{1, 2, 3, 4}
	sk, evk, err := GenerateKeys(p, KeyRequest{Rotations: steps, Relinearize: true})
	if err != nil {
		return nil, err
	}
	r := rand.New(rand.NewPCG(1, 2))
	values := make([]float64, p.Slots())
	for i := range values {
		values[i] = r.Float64()*2 - 1
	}
	top, err := encryptSlots(p, sk, values)
	if err != nil {
		return nil, err
	}
	ev := NewEvaluator(p, evk)
	for _, level := range levels {
		if level < 1 || level > p.MaxLevel() {
			return nil, fmt.Errorf("measure: level %d outside [1, %d]", level, p.MaxLevel())
		}
		ct := top
		if d := p.MaxLevel() - level; d > 0 {
			ct = ev.DropLevel(top, d)
		}
		w, err := weightsFor(values)
		if err != nil {
			return nil, err
		}
		enc := NewEncoder(p, w)
		scale := Scale{Pow2: p.Spec().LogScale}
		pt := enc.Plaintext("v", level, scale, p.Slots())
		if err := enc.Err(); err != nil {
			return nil, err
		}
		t := OpTiming{LogN: logN, Level: level, Specials: len(logP)}
		t.Add = median(reps, func() { ev.Add(ct, ct) })
		t.MulPlain = median(reps, func() { ev.MulPlain(ct, pt) })
		t.MulRelin = median(reps, func() { ev.Relinearize(ev.Mul(ct, ct)) })
		prod := ev.MulPlain(ct, pt)
		t.Rescale = median(reps, func() { ev.Rescale(prod) })
		t.Rotate = median(reps, func() { ev.Rotate(ct, 1) })
		t.Hoisted = median(reps, func() { ev.RotateHoisted(ct, steps...) })
		terms := []*Ciphertext{ct, ct, ct, ct}
		t.RotSum = median(reps, func() { ev.RotateSum(terms, steps) })
		mul := enc.Multiplier("v", level, scale, p.Slots())
		factors := []*Plaintext{mul, mul, mul, mul}
		t.Dot = median(reps, func() { ev.DotPlain(terms, factors) })
		t.Encode = median(reps, func() { enc.Plaintext("v", level, scale, p.Slots()) })
		if err := errors.Join(ev.Err(), enc.Err()); err != nil {
			return nil, err
		}
		out = append(out, t)
	}
	return out, nil
}

func weightsFor(v []float64) (*Weights, error) {
	blob, err := BuildWeights([]string{"v"}, [][]float64{v})
	if err != nil {
		return nil, err
	}
	sum := sha256.Sum256(blob)
	return ParseWeights(blob, hex.EncodeToString(sum[:]))
}

func median(reps int, f func()) float64 {
	d := make([]float64, reps)
	for i := range d {
		start := time.Now()
		f()
		d[i] = float64(time.Since(start).Nanoseconds())
	}
	slices.Sort(d)
	return d[reps/2]
}
