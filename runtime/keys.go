package runtime

import (
	"crypto/sha256"
	"errors"
	"fmt"
	"slices"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
)

// SecretKey is the client's secret key. It never leaves the client: the
// evaluating side needs only EvaluationKeys.
type SecretKey struct {
	sk *rlwe.SecretKey
	fp [sha256.Size]byte
}

// EvaluationKeys are the public keys the evaluating side needs: one Galois
// key per rotation step and, if the program multiplies two ciphertexts, a
// relinearization key.
//
// A rotation key may be made for a level below the top: it then holds only
// the digits and primes of that level and is about (ℓ+1)(ℓ+2)/((L+1)(L+2))
// the size of a top-level key, and it can rotate ciphertexts at level ℓ or
// below only (the evaluator refuses it for a higher one).
type EvaluationKeys struct {
	fp     [sha256.Size]byte
	relin  *rlwe.RelinearizationKey
	steps  []int                   // normalised steps, ascending
	galois map[int]*rlwe.GaloisKey // by normalised step
}

// KeyRequest lists the evaluation keys a program needs.
type KeyRequest struct {
	Rotations []int // left-rotation steps; any integer, taken modulo Slots
	// Levels, when set, has one entry per rotation: the highest level at
	// which the program rotates by that step, and so the level its key is
	// made for. Nil makes every key at the top level.
	Levels      []int
	Relinearize bool // whether a relinearization key is needed
}

// keyLevels maps each normalised step of req to the level its key needs:
// the highest level req gives it, the top level when req gives none.
func (p *Params) keyLevels(req KeyRequest) (map[int]int, error) {
	if req.Levels != nil && len(req.Levels) != len(req.Rotations) {
		return nil, fmt.Errorf("key request: %d levels for %d rotations", len(req.Levels), len(req.Rotations))
	}
	out := map[int]int{}
	for i, k := range req.Rotations {
		lvl := p.MaxLevel()
		if req.Levels != nil {
			lvl = req.Levels[i]
		}
		if lvl < 0 || lvl > p.MaxLevel() {
			return nil, fmt.Errorf("key request: rotation %d at level %d, want 0..%d", k, lvl, p.MaxLevel())
		}
		if s := p.normStep(k); s != 0 {
			if old, ok := out[s]; !ok || lvl > old {
				out[s] = lvl
			}
		}
	}
	return out, nil
}

// normalizeSteps maps rotation steps to 1..slots-1 (a left rotation by k is
// one by k mod slots), drops the identity, sorts and removes duplicates.
func normalizeSteps(slots int, steps []int) []int {
	out := make([]int, 0, len(steps))
	for _, k := range steps {
		if r := ((k % slots) + slots) % slots; r != 0 {
			out = append(out, r)
		}
	}
	slices.Sort(out)
	return slices.Compact(out)
}

// normStep maps one rotation step to 0..slots-1.
func (p *Params) normStep(k int) int {
	s := p.Slots()
	return ((k % s) + s) % s
}

// GenerateKeys draws a fresh secret key and the evaluation keys req asks
// for. The secret is uniform ternary (lattigo's default distribution).
func GenerateKeys(p *Params, req KeyRequest) (sk *SecretKey, evk *EvaluationKeys, err error) {
	defer recoverTo(&err, "generate keys")
	if !p.ok() {
		return nil, nil, errors.New("generate keys: nil parameters (or not made by NewParams)")
	}
	levels, err := p.keyLevels(req)
	if err != nil {
		return nil, nil, fmt.Errorf("generate keys: %w", err)
	}
	kgen := rlwe.NewKeyGenerator(p.hp)
	s := kgen.GenSecretKeyNew()
	k := &EvaluationKeys{fp: p.fp, steps: normalizeSteps(p.Slots(), req.Rotations), galois: map[int]*rlwe.GaloisKey{}}
	if req.Relinearize {
		k.relin = kgen.GenRelinearizationKeyNew(s)
	}
	for _, step := range k.steps {
		lvl := levels[step]
		k.galois[step] = kgen.GenGaloisKeyNew(p.hp.GaloisElement(step), s, rlwe.EvaluationKeyParameters{LevelQ: &lvl})
	}
	return &SecretKey{sk: s, fp: p.fp}, k, nil
}

// Rotations returns the rotation steps the keys hold, normalised to
// 1..Slots-1 and ascending.
func (k *EvaluationKeys) Rotations() []int {
	if k == nil {
		return nil
	}
	return slices.Clone(k.steps)
}

// HasRelinearization reports whether the keys hold a relinearization key.
func (k *EvaluationKeys) HasRelinearization() bool {
	return k != nil && k.relin != nil
}

// Size returns the size in bytes of the keys' serialised payload.
func (k *EvaluationKeys) Size() int {
	if k == nil {
		return 0
	}
	n := evkFramingSize(len(k.steps))
	if k.relin != nil {
		n += k.relin.BinarySize()
	}
	for _, s := range k.steps {
		n += k.galois[s].BinarySize()
	}
	return n
}

// keySet returns the keys as the set lattigo's evaluator takes.
func (k *EvaluationKeys) keySet() rlwe.EvaluationKeySet {
	gks := make([]*rlwe.GaloisKey, 0, len(k.steps))
	for _, s := range k.steps {
		gks = append(gks, k.galois[s])
	}
	return rlwe.NewMemEvaluationKeySet(k.relin, gks...)
}

// check verifies that k holds everything req asks for.
func (k *EvaluationKeys) check(p *Params, req KeyRequest) error {
	if k.fp != p.fp {
		return fmt.Errorf("evaluation keys for another model (%s)", fingerprints(k.fp[:], p.fp[:]))
	}
	if req.Relinearize && k.relin == nil {
		return errors.New("no relinearization key, and the program multiplies ciphertexts")
	}
	levels, err := p.keyLevels(req)
	if err != nil {
		return err
	}
	var missing []int
	for _, s := range normalizeSteps(p.Slots(), req.Rotations) {
		gk, ok := k.galois[s]
		if !ok {
			missing = append(missing, s)
			continue
		}
		if gk.LevelQ() < levels[s] {
			return fmt.Errorf("the rotation key for step %d is made for level %d, and the program rotates at level %d", s, gk.LevelQ(), levels[s])
		}
	}
	if len(missing) > 0 {
		return fmt.Errorf("no rotation key for steps %v (the keys hold %v)", missing, k.steps)
	}
	return nil
}

// checkSecretKey verifies that sk belongs to p.
func (p *Params) checkSecretKey(sk *SecretKey) error {
	if sk == nil || sk.sk == nil {
		return errors.New("nil secret key")
	}
	if sk.fp != p.fp {
		return fmt.Errorf("secret key for another model (%s)", fingerprints(sk.fp[:], p.fp[:]))
	}
	return nil
}
