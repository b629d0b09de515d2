package runtime

import (
	"errors"
	"fmt"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
	"github.com/tuneinsight/lattigo/v5/he/hefloat"
)

// Encrypt encrypts values under sk as layout l says: one ciphertext per
// chunk of l.Chunk values, each value at its slot, in every copy and every
// period (l.Period must divide Slots), so rotations within a block of
// l.Period slots wrap around as the program expects. The ciphertexts are at
// the top level and at scale exactly 2^LogScale.
func Encrypt(p *Params, sk *SecretKey, values []float64, l Layout) (cts []*Ciphertext, err error) {
	defer recoverTo(&err, "encrypt")
	if !p.ok() {
		return nil, errors.New("encrypt: nil parameters (or not made by NewParams)")
	}
	if err := p.checkSecretKey(sk); err != nil {
		return nil, fmt.Errorf("encrypt: %w", err)
	}
	slots, err := l.pack(p.Slots(), values)
	if err != nil {
		return nil, fmt.Errorf("encrypt: %w", err)
	}
	cts = make([]*Ciphertext, len(slots))
	for j, s := range slots {
		if cts[j], err = encryptSlots(p, sk, s); err != nil {
			return nil, fmt.Errorf("encrypt: %s%w", which(j, len(slots)), err)
		}
	}
	return cts, nil
}

// encryptSlots encrypts a full slot vector at the top level and the default
// scale.
func encryptSlots(p *Params, sk *SecretKey, slots []float64) (*Ciphertext, error) {
	pt := hefloat.NewPlaintext(p.hp, p.MaxLevel())
	var err error
	if pt.Scale, err = p.rlweScale(p.DefaultScale()); err != nil {
		return nil, err
	}
	if err := hefloat.NewEncoder(p.hp).Encode(slots, pt); err != nil {
		return nil, fmt.Errorf("encode: %w", err)
	}
	c, err := rlwe.NewEncryptor(p.hp, sk.sk).EncryptNew(pt)
	if err != nil {
		return nil, err
	}
	return p.wrap(c), nil
}

// Decrypt decrypts the ciphertexts of a vector laid out as l says and
// returns the real parts of its l.Size elements: element i from ciphertext
// i / l.Chunk, slot i % l.Chunk (the first copy).
func Decrypt(p *Params, sk *SecretKey, cts []*Ciphertext, l Layout) (values []float64, err error) {
	defer recoverTo(&err, "decrypt")
	if !p.ok() {
		return nil, errors.New("decrypt: nil parameters (or not made by NewParams)")
	}
	if err := p.checkSecretKey(sk); err != nil {
		return nil, fmt.Errorf("decrypt: %w", err)
	}
	if err := l.Validate(p.Slots()); err != nil {
		return nil, fmt.Errorf("decrypt: %w", err)
	}
	if len(cts) != l.Count() {
		return nil, fmt.Errorf("decrypt: %d ciphertexts, the layout has %d", len(cts), l.Count())
	}
	slots := make([][]float64, len(cts))
	for j, ct := range cts {
		if err := p.checkCiphertext(ct); err != nil {
			return nil, fmt.Errorf("decrypt: %s%w", which(j, len(cts)), err)
		}
		if slots[j], err = decryptSlots(p, sk, ct); err != nil {
			return nil, fmt.Errorf("decrypt: %s%w", which(j, len(cts)), err)
		}
	}
	return l.unpack(slots), nil
}

// decryptSlots decrypts a checked ciphertext and returns the real parts of
// all its slots.
func decryptSlots(p *Params, sk *SecretKey, ct *Ciphertext) ([]float64, error) {
	pt := rlwe.NewDecryptor(p.hp, sk.sk).DecryptNew(ct.ct)
	out := make([]float64, p.Slots())
	if err := hefloat.NewEncoder(p.hp).Decode(pt, out); err != nil {
		return nil, fmt.Errorf("decode: %w", err)
	}
	return out, nil
}

// which names ciphertext j of n in a message, "ciphertext 2: ", or nothing
// when there is only one.
func which(j, n int) string {
	if n == 1 {
		return ""
	}
	return fmt.Sprintf("ciphertext %d: ", j)
}
