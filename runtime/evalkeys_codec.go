package runtime

import (
	"encoding/binary"
	"fmt"
	"io"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
)

// Evaluation keys payload, little-endian:
//
//	u8   1 if a relinearization key follows, else 0
//	u32  number of rotation keys n
//	n × u32 rotation steps, ascending, each in 1..Slots-1
//	n × u8  the level each rotation key is made for, in the same order
//	     the relinearization key (lattigo encoding, top level), if any
//	n ×  the Galois key of each step, in the same order (lattigo encoding)
//
// Every lattigo object has a size fixed by the parameters and its level,
// so the whole payload size follows from the first bytes, and each key is
// checked against the layout of a key of that shape before lattigo
// decodes it.

// evkFramingSize is the size of the step and level lists for n rotation
// keys.
func evkFramingSize(n int) int {
	return 5 + 5*n
}

// evkLayouts holds the layout of the relinearization key for p.
type evkLayouts struct {
	relin layout // Galois keys differ by level: see galoisLayout
}

func newEvkLayouts(p *Params) (evkLayouts, error) {
	relin, err := p.layout("relinearization key", func() (layout, error) {
		rk := rlwe.NewRelinearizationKey(p.hp)
		return newLayout(rk, func() { fillGadget(&rk.GadgetCiphertext) })
	})
	if err != nil {
		return evkLayouts{}, err
	}
	return evkLayouts{relin: relin}, nil
}

// galoisLayout is the layout of a Galois key made for level lvl.
func (p *Params) galoisLayout(lvl int) (layout, error) {
	return p.layout(fmt.Sprintf("galois key at level %d", lvl), func() (layout, error) {
		gk := rlwe.NewGaloisKey(p.hp, rlwe.EvaluationKeyParameters{LevelQ: &lvl})
		return newLayout(gk, func() { fillGadget(&gk.GadgetCiphertext) })
	})
}

// maxEvalKeysSize bounds the payload of an evaluation-keys file read for
// req: as many keys as req asks for, each of them as large as a Galois key
// (a relinearization key is 16 bytes smaller). Keys for every rotation
// would take thousands of times more at large ring degrees, so the bound is
// that of the program's own keys.
func maxEvalKeysSize(p *Params, req KeyRequest) int64 {
	n := len(normalizeSteps(p.Slots(), req.Rotations))
	if req.Relinearize {
		n++
	}
	return int64(evkFramingSize(n)) + int64(n)*(16+gadgetSize(p))
}

// gadgetSize is the encoded size of a key-switching key (the part of a
// relinearization key, and of a Galois key after its 16 bytes of Galois
// element and root order), computed without allocating one: an 8-byte
// decomposition base, then a matrix (8-byte length) of rows (8-byte length)
// of vectors (8-byte length) of two polynomials over Q and P, each a
// matrix of rows of N coefficients. A test checks it against lattigo's
// BinarySize.
func gadgetSize(p *Params) int64 {
	n := int64(1) << p.spec.LogN
	poly := func(rows int) int64 { return 8 + int64(rows)*(8+8*n) }
	qp := poly(len(p.spec.Q)) + poly(len(p.spec.P))
	vec := 8 + 2*qp
	lq, lp := p.hp.MaxLevelQ(), p.hp.MaxLevelP()
	size := int64(8 + 8)
	for _, m := range p.hp.BaseTwoDecompositionVectorSize(lq, lp, 0)[:p.hp.BaseRNSDecompositionVectorSize(lq, lp)] {
		size += 8 + int64(m)*vec
	}
	return size
}

// writePayload writes the evaluation-keys payload.
func (k *EvaluationKeys) writePayload(w io.Writer) error {
	var b []byte
	if k.relin != nil {
		b = append(b, 1)
	} else {
		b = append(b, 0)
	}
	b = binary.LittleEndian.AppendUint32(b, uint32(len(k.steps)))
	for _, s := range k.steps {
		b = binary.LittleEndian.AppendUint32(b, uint32(s))
	}
	for _, s := range k.steps {
		b = append(b, uint8(k.galois[s].LevelQ()))
	}
	if _, err := w.Write(b); err != nil {
		return err
	}
	if k.relin != nil {
		if _, err := k.relin.WriteTo(w); err != nil {
			return err
		}
	}
	for _, s := range k.steps {
		if _, err := k.galois[s].WriteTo(w); err != nil {
			return err
		}
	}
	return nil
}

// decodeEvalKeys decodes a checked payload.
func decodeEvalKeys(p *Params, payload []byte) (*EvaluationKeys, error) {
	if len(payload) < evkFramingSize(0) {
		return nil, fmt.Errorf("payload of %d bytes is too short for evaluation keys", len(payload))
	}
	hasRelin := payload[0]
	if hasRelin > 1 {
		return nil, fmt.Errorf("malformed evaluation keys: relinearization flag %d", hasRelin)
	}
	n := binary.LittleEndian.Uint32(payload[1:5])
	if n > uint32(p.Slots()-1) {
		return nil, fmt.Errorf("malformed evaluation keys: %d rotation keys, at most %d exist", n, p.Slots()-1)
	}
	frame := evkFramingSize(int(n))
	if len(payload) < frame {
		return nil, fmt.Errorf("malformed evaluation keys: %d bytes, the step list alone takes %d", len(payload), frame)
	}
	k := &EvaluationKeys{fp: p.fp, galois: map[int]*rlwe.GaloisKey{}}
	for i := 0; i < int(n); i++ {
		s := int(binary.LittleEndian.Uint32(payload[5+4*i:]))
		if s < 1 || s >= p.Slots() || (i > 0 && s <= k.steps[i-1]) {
			return nil, fmt.Errorf("malformed evaluation keys: step %d at position %d (want ascending steps in 1..%d)", s, i, p.Slots()-1)
		}
		k.steps = append(k.steps, s)
	}
	l, err := newEvkLayouts(p)
	if err != nil {
		return nil, err
	}
	levels := make([]int, n)
	galois := make([]layout, n)
	want := int64(frame)
	for i := range levels {
		levels[i] = int(payload[5+4*int(n)+i])
		if levels[i] > p.MaxLevel() {
			return nil, fmt.Errorf("malformed evaluation keys: the key for step %d is made for level %d, the chain has %d", k.steps[i], levels[i], p.MaxLevel())
		}
		if galois[i], err = p.galoisLayout(levels[i]); err != nil {
			return nil, err
		}
		want += int64(galois[i].size)
	}
	if hasRelin == 1 {
		want += int64(l.relin.size)
	}
	if int64(len(payload)) != want {
		what := fmt.Sprintf("%d rotation keys", n)
		if n == 1 {
			what = "1 rotation key"
		}
		if hasRelin == 1 {
			what += " and a relinearization key"
		}
		return nil, fmt.Errorf("malformed evaluation keys: %d bytes, want %d for %s", len(payload), want, what)
	}
	rest := payload[frame:]
	if hasRelin == 1 {
		b := rest[:l.relin.size]
		rest = rest[len(b):]
		if err := l.relin.match(b); err != nil {
			return nil, fmt.Errorf("relinearization key: %w", err)
		}
		k.relin = rlwe.NewRelinearizationKey(p.hp)
		if err := readInto(k.relin, b); err != nil {
			return nil, fmt.Errorf("relinearization key: %w", err)
		}
		if err := p.reducedGadget(&k.relin.GadgetCiphertext); err != nil {
			return nil, fmt.Errorf("relinearization key: %w", err)
		}
	}
	for i, s := range k.steps {
		b := rest[:galois[i].size]
		rest = rest[len(b):]
		// The first 8 bytes hold the Galois element, which the layout (made
		// with element 0) cannot know; it must be the one of the step.
		if got, want := binary.LittleEndian.Uint64(b[:8]), p.hp.GaloisElement(s); got != want {
			return nil, fmt.Errorf("rotation key for step %d: Galois element %d, want %d", s, got, want)
		}
		if err := galois[i].match(b, [2]int{0, 8}); err != nil {
			return nil, fmt.Errorf("rotation key for step %d: %w", s, err)
		}
		gk := rlwe.NewGaloisKey(p.hp, rlwe.EvaluationKeyParameters{LevelQ: &levels[i]})
		if err := readInto(gk, b); err != nil {
			return nil, fmt.Errorf("rotation key for step %d: %w", s, err)
		}
		if err := p.reducedGadget(&gk.GadgetCiphertext); err != nil {
			return nil, fmt.Errorf("rotation key for step %d: %w", s, err)
		}
		k.galois[s] = gk
	}
	return k, nil
}
