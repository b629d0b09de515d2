package runtime

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math/big"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
	"github.com/tuneinsight/lattigo/v5/he/hefloat"
)

// lattigo's ciphertext encoding: a flag byte (1: metadata follows), the
// metadata as fixed-size JSON, then the polynomials. The metadata is skipped
// by the layout check (its JSON holds the scale) and checked after decoding.

// metaDataSize is the size of lattigo's encoded ciphertext metadata.
func metaDataSize() int {
	return (&rlwe.MetaData{}).BinarySize()
}

// ciphertextSize is the payload size of a ciphertext of the given degree and
// level for p: flag, metadata, then a vector of degree+1 polynomials, each
// a matrix of level+1 rows of N coefficients (every vector and matrix with
// an 8-byte length). A test checks it against lattigo's BinarySize.
func ciphertextSize(p *Params, degree, level int) int64 {
	n := int64(1) << p.spec.LogN
	poly := 8 + int64(level+1)*(8+8*n)
	return 1 + int64(metaDataSize()) + 8 + int64(degree+1)*poly
}

// maxCiphertextSize bounds the payload of any ciphertext file for p.
func maxCiphertextSize(p *Params) int64 {
	return ciphertextSize(p, 2, p.MaxLevel())
}

// ciphertextShape finds the degree and level a payload size belongs to.
func ciphertextShape(p *Params, size int64) (degree, level int, ok bool) {
	for d := 1; d <= 2; d++ {
		for l := 0; l <= p.MaxLevel(); l++ {
			if ciphertextSize(p, d, l) == size {
				return d, l, true
			}
		}
	}
	return 0, 0, false
}

// encodeCiphertextSize checks that lattigo will encode ct in exactly
// ciphertextSize bytes: its metadata JSON prints the scale with a two-digit
// binary exponent, so a scale of 2^100 or more does not fit.
func encodeCiphertextSize(p *Params, ct *rlwe.Ciphertext) (int64, error) {
	want := ciphertextSize(p, ct.Degree(), ct.Level())
	if got := int64(ct.BinarySize()); got != want {
		return 0, fmt.Errorf("ciphertext of %d bytes, want %d", got, want)
	}
	if s := log2Scale(ct.Scale); !(s >= -99 && s < 100) {
		return 0, fmt.Errorf("cannot store a ciphertext at scale 2^%.1f: lattigo's encoding needs a scale in [2^-99, 2^100)", s)
	}
	return want, nil
}

// decodeCiphertext decodes a checked payload.
func decodeCiphertext(p *Params, payload []byte) (*Ciphertext, error) {
	degree, level, ok := ciphertextShape(p, int64(len(payload)))
	if !ok {
		return nil, fmt.Errorf("payload of %d bytes is not a ciphertext for these parameters", len(payload))
	}
	l, err := p.layout(fmt.Sprintf("ciphertext degree %d level %d", degree, level), func() (layout, error) {
		c := hefloat.NewCiphertext(p.hp, degree, level)
		return newLayout(c, func() {
			for _, v := range c.Value {
				fillPoly(v)
			}
		})
	})
	if err != nil {
		return nil, err
	}
	ct := hefloat.NewCiphertext(p.hp, degree, level)
	meta := [2]int{1, 1 + metaDataSize()}
	if err := l.match(payload, meta); err != nil {
		return nil, fmt.Errorf("not a ciphertext for these parameters: %w", err)
	}
	if err := canonicalMetaData(p, payload[meta[0]:meta[1]]); err != nil {
		return nil, fmt.Errorf("decode ciphertext: %w", err)
	}
	// lattigo's metadata decoder only ever sets flags, never clears them:
	// start from empty metadata so that what is checked is what the file says.
	ct.MetaData = &rlwe.MetaData{}
	if err := readInto(ct, payload); err != nil {
		return nil, fmt.Errorf("decode ciphertext: %w", err)
	}
	if err := checkMetaData(p, ct.MetaData); err != nil {
		return nil, fmt.Errorf("decode ciphertext: %w", err)
	}
	for i, v := range ct.Value {
		if err := reduced(v, p.spec.Q); err != nil {
			return nil, fmt.Errorf("decode ciphertext: polynomial %d: %w", i, err)
		}
	}
	return p.wrap(ct), nil
}

// canonicalMetaData checks that b is, byte for byte, the metadata lattigo
// writes for a ciphertext of p at the scale b states, before lattigo's
// ciphertext decoder sees it. lattigo's metadata decoder accepts JSON in
// other spellings (keys in any case, fields in any order) and dereferences
// nil when the scale's modulus does not parse, so the scale's two numbers
// are checked first, by this package's own JSON decoding.
func canonicalMetaData(p *Params, b []byte) error {
	var aux struct {
		PlaintextMetaData struct {
			Scale struct{ Value, Mod string }
		}
	}
	if err := json.Unmarshal(b, &aux); err != nil {
		return fmt.Errorf("metadata: %w", err)
	}
	sc := aux.PlaintextMetaData.Scale
	if v, ok := new(big.Float).SetPrec(rlwe.ScalePrecision).SetString(sc.Value); !ok || v.Sign() <= 0 || v.IsInf() {
		return fmt.Errorf("metadata: scale %q is not a positive number", sc.Value)
	}
	if m, ok := new(big.Float).SetString(sc.Mod); !ok || m.Sign() != 0 {
		return errors.New("ciphertext scale has a modulus (not a CKKS scale)")
	}
	m := &rlwe.MetaData{}
	if err := m.UnmarshalBinary(b); err != nil {
		return fmt.Errorf("metadata: %w", err)
	}
	if err := checkMetaData(p, m); err != nil {
		return err
	}
	want, err := m.MarshalBinary()
	if err != nil {
		return fmt.Errorf("metadata: %w", err)
	}
	if !bytes.Equal(b, want) {
		return errors.New("metadata not in the form lattigo writes")
	}
	return nil
}

// checkMetaData accepts only the metadata this runtime's ciphertexts have.
func checkMetaData(p *Params, m *rlwe.MetaData) error {
	switch {
	case m == nil:
		return errors.New("no metadata")
	case !m.IsNTT || m.IsMontgomery:
		return errors.New("ciphertext not in NTT form")
	case !m.IsBatched || m.LogDimensions != p.hp.LogMaxDimensions():
		return fmt.Errorf("ciphertext slot layout %v, want batched %v", m.LogDimensions, p.hp.LogMaxDimensions())
	case m.Scale.Mod != nil:
		return errors.New("ciphertext scale has a modulus (not a CKKS scale)")
	case m.Scale.Value.Sign() <= 0 || m.Scale.Value.IsInf():
		return errors.New("ciphertext scale is not a positive number")
	}
	return nil
}
