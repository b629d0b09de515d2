package runtime

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"errors"
	"fmt"
	"math/bits"
	"strconv"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
	"github.com/tuneinsight/lattigo/v5/he/hefloat"
	"github.com/tuneinsight/lattigo/v5/ring"
)

// Limits on parameters this runtime accepts. They are sanity bounds, not a
// security check: the generator checks the 128-bit bound.
const (
	minLogN     = 4  // lattigo's rlwe.MinLogN
	maxLogN     = 17 // beyond any planned model; size caps assume it
	maxLogScale = 60 // one prime per rescale (lattigo PREC64 mode)
	maxPrimes   = 64
	maxPrimeLog = 61 // lattigo accepts primes below 2^61 for Q and P
)

// ParamSpec describes a CKKS parameter set with explicit primes, as pinned in
// an emitted program's params.go.
type ParamSpec struct {
	LogN     int      // log2 of the ring degree N; slots = N/2
	Q        []uint64 // ciphertext primes, q0 first; q_l is the prime of level l
	P        []uint64 // key-switching primes
	LogScale int      // log2 of the default scale (the scale is exactly 2^LogScale)
	ModelID  string   // identifies the program (hash of its structure); part of the fingerprint
}

// Params is a checked CKKS parameter set: standard ring, secret drawn
// uniformly from {-1, 0, 1} (lattigo's default Ternary{P: 2/3}), error a
// discrete Gaussian with sigma 3.2 bounded at 6 sigma (lattigo's default).
// It is immutable and safe for concurrent use.
type Params struct {
	spec ParamSpec
	hp   hefloat.Parameters
	fp   [sha256.Size]byte
	hex  string
	lays *layoutCache
}

// secretDist and errorDist are the distributions of every parameter set.
// They are stated here rather than left to lattigo's defaults so that a
// change of default in lattigo cannot change them silently; they enter the
// fingerprint. Sparse secrets are deliberately not offered.
var (
	secretDist = ring.Ternary{P: 2.0 / 3.0}
	errorDist  = ring.DiscreteGaussian{Sigma: 3.2, Bound: 19.2}
)

// NewParams checks spec and builds the parameter set.
func NewParams(spec ParamSpec) (p *Params, err error) {
	defer recoverTo(&err, "params")
	if err := checkSpec(spec); err != nil {
		return nil, fmt.Errorf("params: %w", err)
	}
	spec.Q = append([]uint64(nil), spec.Q...)
	spec.P = append([]uint64(nil), spec.P...)
	hp, err := hefloat.NewParametersFromLiteral(hefloat.ParametersLiteral{
		LogN:            spec.LogN,
		Q:               spec.Q,
		P:               spec.P,
		Xs:              secretDist,
		Xe:              errorDist,
		RingType:        ring.Standard,
		LogDefaultScale: spec.LogScale,
	})
	if err != nil {
		return nil, fmt.Errorf("params: lattigo refused the parameters: %w", err)
	}
	if hp.LevelsConsumedPerRescaling() != 1 {
		return nil, errors.New("params: lattigo consumes more than one prime per rescale")
	}
	p = &Params{spec: spec, hp: hp, lays: &layoutCache{m: map[string]layout{}}}
	p.fp = fingerprint(spec)
	p.hex = hex.EncodeToString(p.fp[:])
	return p, nil
}

func checkSpec(s ParamSpec) error {
	if s.LogN < minLogN || s.LogN > maxLogN {
		return fmt.Errorf("LogN %d, want %d..%d", s.LogN, minLogN, maxLogN)
	}
	if len(s.Q) == 0 {
		return errors.New("no ciphertext primes Q")
	}
	if len(s.P) == 0 {
		return errors.New("no key-switching primes P (key switching needs at least one)")
	}
	if len(s.Q)+len(s.P) > maxPrimes {
		return fmt.Errorf("%d primes, at most %d", len(s.Q)+len(s.P), maxPrimes)
	}
	if s.LogScale < 1 || s.LogScale > maxLogScale {
		return fmt.Errorf("LogScale %d, want 1..%d", s.LogScale, maxLogScale)
	}
	twoN := uint64(2) << s.LogN
	seen := map[uint64]string{}
	check := func(name string, i int, q uint64) error {
		where := fmt.Sprintf("%s[%d] = %d", name, i, q)
		switch {
		case q < 3 || bits.Len64(q) > maxPrimeLog:
			return fmt.Errorf("%s: want a prime of 2..%d bits", where, maxPrimeLog)
		case !ring.IsPrime(q):
			return fmt.Errorf("%s: not a prime", where)
		case q%twoN != 1:
			return fmt.Errorf("%s: not NTT-friendly (q mod 2N = %d, want 1)", where, q%twoN)
		}
		if other, dup := seen[q]; dup {
			return fmt.Errorf("%s: same prime as %s", where, other)
		}
		seen[q] = fmt.Sprintf("%s[%d]", name, i)
		return nil
	}
	for i, q := range s.Q {
		if err := check("Q", i, q); err != nil {
			return err
		}
	}
	for i, q := range s.P {
		if err := check("P", i, q); err != nil {
			return err
		}
	}
	return nil
}

// fingerprint hashes a canonical encoding of everything that makes two
// parameter sets incompatible: ring degree, primes, default scale, secret
// and error distributions, and the model identity.
func fingerprint(s ParamSpec) [sha256.Size]byte {
	h := sha256.New()
	var b []byte
	b = append(b, "lanthorn params v1\x00"...)
	b = binary.LittleEndian.AppendUint32(b, uint32(s.LogN))
	b = binary.LittleEndian.AppendUint32(b, uint32(len(s.Q)))
	for _, q := range s.Q {
		b = binary.LittleEndian.AppendUint64(b, q)
	}
	b = binary.LittleEndian.AppendUint32(b, uint32(len(s.P)))
	for _, q := range s.P {
		b = binary.LittleEndian.AppendUint64(b, q)
	}
	b = binary.LittleEndian.AppendUint32(b, uint32(s.LogScale))
	dists := "xs=ternary p=" + strconv.FormatFloat(secretDist.P, 'g', -1, 64) +
		" h=" + strconv.Itoa(secretDist.H) +
		";xe=gaussian sigma=" + strconv.FormatFloat(errorDist.Sigma, 'g', -1, 64) +
		" bound=" + strconv.FormatFloat(errorDist.Bound, 'g', -1, 64)
	b = binary.LittleEndian.AppendUint32(b, uint32(len(dists)))
	b = append(b, dists...)
	b = binary.LittleEndian.AppendUint32(b, uint32(len(s.ModelID)))
	b = append(b, s.ModelID...)
	h.Write(b)
	var out [sha256.Size]byte
	copy(out[:], h.Sum(nil))
	return out
}

// ok reports whether p was made by NewParams.
func (p *Params) ok() bool { return p != nil && p.hex != "" }

// Fingerprint returns the hex SHA-256 of a canonical encoding of LogN, Q, P,
// LogScale, the secret and error distributions and ModelID. Every key and
// ciphertext file carries it, so material made for another model or other
// parameters is refused.
func (p *Params) Fingerprint() string {
	if !p.ok() {
		return ""
	}
	return p.hex
}

// Spec returns a copy of the spec the parameters were built from.
func (p *Params) Spec() ParamSpec {
	if !p.ok() {
		return ParamSpec{}
	}
	s := p.spec
	s.Q = append([]uint64(nil), s.Q...)
	s.P = append([]uint64(nil), s.P...)
	return s
}

// MaxLevel returns the level of a fresh ciphertext, len(Q)-1.
func (p *Params) MaxLevel() int {
	if !p.ok() {
		return -1
	}
	return len(p.spec.Q) - 1
}

// Slots returns the number of real slots of a ciphertext, N/2.
func (p *Params) Slots() int {
	if !p.ok() {
		return 0
	}
	return 1 << (p.spec.LogN - 1)
}

// LogQP returns log2 of the product of all primes, Q and P: the modulus
// the 128-bit security bound is stated for.
func (p *Params) LogQP() float64 {
	if !p.ok() {
		return 0
	}
	return p.hp.LogQP()
}

// fingerprints prints a fingerprint found and the one wanted for messages,
// "fingerprint 3f2a91c0…, want 91c0a3f2…": 4 bytes of each, or as many as it
// takes to tell them apart.
func fingerprints(got, want []byte) string {
	n := min(4, len(got), len(want))
	for n < len(got) && n < len(want) && string(got[:n]) == string(want[:n]) {
		n++
	}
	return fmt.Sprintf("fingerprint %s…, want %s…", hex.EncodeToString(got[:n]), hex.EncodeToString(want[:n]))
}

// GeneratePrimes returns NTT-friendly primes with the given bit sizes, the
// same primes lattigo picks for a parameter literal with LogQ and LogP
// (they are read back from such a literal). The result is deterministic; the
// generator calls it at build time and pins the primes in the emitted code.
func GeneratePrimes(logN int, logQ, logP []int) (q, p []uint64, err error) {
	defer recoverTo(&err, "generate primes")
	if logN < minLogN || logN > maxLogN {
		return nil, nil, fmt.Errorf("generate primes: LogN %d, want %d..%d", logN, minLogN, maxLogN)
	}
	if len(logQ) == 0 || len(logP) == 0 {
		return nil, nil, errors.New("generate primes: need at least one Q and one P prime size")
	}
	if len(logQ)+len(logP) > maxPrimes {
		return nil, nil, fmt.Errorf("generate primes: %d primes, at most %d", len(logQ)+len(logP), maxPrimes)
	}
	for i, b := range logQ {
		if b < 2 || b > rlwe.MaxModuliSize {
			return nil, nil, fmt.Errorf("generate primes: logQ[%d] = %d, want 2..%d", i, b, rlwe.MaxModuliSize)
		}
	}
	for i, b := range logP {
		if b < 2 || b > rlwe.MaxModuliSize+1 {
			return nil, nil, fmt.Errorf("generate primes: logP[%d] = %d, want 2..%d", i, b, rlwe.MaxModuliSize+1)
		}
	}
	hp, err := hefloat.NewParametersFromLiteral(hefloat.ParametersLiteral{
		LogN:            logN,
		LogQ:            logQ,
		LogP:            logP,
		Xs:              secretDist,
		Xe:              errorDist,
		RingType:        ring.Standard,
		LogDefaultScale: 1,
	})
	if err != nil {
		return nil, nil, fmt.Errorf("generate primes: %w", err)
	}
	return hp.Q(), hp.P(), nil
}
