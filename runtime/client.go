package runtime

import (
	"errors"
	"fmt"
	"math"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
	"github.com/tuneinsight/lattigo/v5/he/hefloat"
)

// replicate places values at slots [0, len(values)), zero-pads them to
// period and repeats that block over all slots.
func replicate(slots int, values []float64, period int) ([]float64, error) {
	switch {
	case period < 1 || period > slots:
		return nil, fmt.Errorf("period %d, want 1..%d", period, slots)
	case slots%period != 0:
		return nil, fmt.Errorf("period %d does not divide the %d slots", period, slots)
	case len(values) > period:
		return nil, fmt.Errorf("%d values do not fit a period of %d", len(values), period)
	}
	out := make([]float64, slots)
	for i, v := range values {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("value %d is %v", i, v)
		}
		for j := i; j < slots; j += period {
			out[j] = v
		}
	}
	return out, nil
}

// Encrypt encrypts values under sk: values sit at slots [0, len(values)),
// zero-padded to period and replicated with that period over all slots
// (period must divide Slots), so rotations within a block of period slots
// wrap around as the program expects. The ciphertext is at the top level
// and at scale exactly 2^LogScale.
func Encrypt(p *Params, sk *SecretKey, values []float64, period int) (ct *Ciphertext, err error) {
	defer recoverTo(&err, "encrypt")
	if !p.ok() {
		return nil, errors.New("encrypt: nil parameters (or not made by NewParams)")
	}
	if err := p.checkSecretKey(sk); err != nil {
		return nil, fmt.Errorf("encrypt: %w", err)
	}
	slots, err := replicate(p.Slots(), values, period)
	if err != nil {
		return nil, fmt.Errorf("encrypt: %w", err)
	}
	pt := hefloat.NewPlaintext(p.hp, p.MaxLevel())
	if pt.Scale, err = p.rlweScale(p.DefaultScale()); err != nil {
		return nil, fmt.Errorf("encrypt: %w", err)
	}
	if err := hefloat.NewEncoder(p.hp).Encode(slots, pt); err != nil {
		return nil, fmt.Errorf("encrypt: encode: %w", err)
	}
	c, err := rlwe.NewEncryptor(p.hp, sk.sk).EncryptNew(pt)
	if err != nil {
		return nil, fmt.Errorf("encrypt: %w", err)
	}
	return p.wrap(c), nil
}

// Decrypt decrypts ct with sk and returns the real parts of its first n
// slots.
func Decrypt(p *Params, sk *SecretKey, ct *Ciphertext, n int) (values []float64, err error) {
	defer recoverTo(&err, "decrypt")
	if !p.ok() {
		return nil, errors.New("decrypt: nil parameters (or not made by NewParams)")
	}
	if err := p.checkSecretKey(sk); err != nil {
		return nil, fmt.Errorf("decrypt: %w", err)
	}
	if err := p.checkCiphertext(ct); err != nil {
		return nil, fmt.Errorf("decrypt: %w", err)
	}
	if n < 0 || n > p.Slots() {
		return nil, fmt.Errorf("decrypt: %d values asked, want 0..%d", n, p.Slots())
	}
	pt := rlwe.NewDecryptor(p.hp, sk.sk).DecryptNew(ct.ct)
	out := make([]float64, p.Slots())
	if err := hefloat.NewEncoder(p.hp).Decode(pt, out); err != nil {
		return nil, fmt.Errorf("decrypt: decode: %w", err)
	}
	return out[:n:n], nil
}
