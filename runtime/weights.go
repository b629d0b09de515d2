package runtime

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
)

// Weights blob layout, little-endian:
//
//	8 bytes  magic "LNTHW\x00\x01\x00" (format version 1)
//	u32      number of entries
//	per entry: u16 name length, the name (UTF-8), u32 n, n float64
//
// The generator writes it with BuildWeights; the emitted program embeds it
// and reads it with ParseWeights, which checks its SHA-256 first.
var weightsMagic = []byte("LNTHW\x00\x01\x00")

const (
	maxWeightName  = math.MaxUint16
	maxWeightCount = math.MaxUint32
	minEntrySize   = 2 + 1 + 4 // name length, a one-byte name, value count
)

// Weights is a parsed weights blob: named float64 vectors.
type Weights struct {
	names   []string
	vectors map[string][]float64
}

// BuildWeights encodes named vectors as a weights blob. Names must be
// non-empty and distinct, values finite.
func BuildWeights(names []string, vectors [][]float64) ([]byte, error) {
	if len(names) != len(vectors) {
		return nil, fmt.Errorf("build weights: %d names, %d vectors", len(names), len(vectors))
	}
	if len(names) > maxWeightCount {
		return nil, fmt.Errorf("build weights: %d entries, at most %d", len(names), maxWeightCount)
	}
	seen := map[string]bool{}
	var b bytes.Buffer
	b.Write(weightsMagic)
	b.Write(binary.LittleEndian.AppendUint32(nil, uint32(len(names))))
	for i, name := range names {
		switch {
		case name == "":
			return nil, fmt.Errorf("build weights: entry %d has an empty name", i)
		case len(name) > maxWeightName:
			return nil, fmt.Errorf("build weights: name of entry %d is %d bytes, at most %d", i, len(name), maxWeightName)
		case seen[name]:
			return nil, fmt.Errorf("build weights: %q appears twice", name)
		case len(vectors[i]) > maxWeightCount:
			return nil, fmt.Errorf("build weights: %q: %d values, at most %d", name, len(vectors[i]), maxWeightCount)
		}
		seen[name] = true
		b.Write(binary.LittleEndian.AppendUint16(nil, uint16(len(name))))
		b.WriteString(name)
		b.Write(binary.LittleEndian.AppendUint32(nil, uint32(len(vectors[i]))))
		for j, v := range vectors[i] {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("build weights: %q[%d] is %v", name, j, v)
			}
			b.Write(binary.LittleEndian.AppendUint64(nil, math.Float64bits(v)))
		}
	}
	return b.Bytes(), nil
}

// ParseWeights checks that blob has the SHA-256 wantSHA256 (hex) and then
// decodes it.
func ParseWeights(blob []byte, wantSHA256 string) (*Weights, error) {
	want, err := hex.DecodeString(strings.TrimSpace(wantSHA256))
	if err != nil || len(want) != sha256.Size {
		return nil, fmt.Errorf("weights: expected SHA-256 %q is not 64 hex digits", wantSHA256)
	}
	if got := sha256.Sum256(blob); !bytes.Equal(got[:], want) {
		return nil, fmt.Errorf("weights: SHA-256 %s, want %s: the weights blob is not the one this program was built with",
			hex.EncodeToString(got[:]), hex.EncodeToString(want))
	}
	w, err := decodeWeights(blob)
	if err != nil {
		return nil, fmt.Errorf("weights: %w", err)
	}
	return w, nil
}

func decodeWeights(b []byte) (*Weights, error) {
	if len(b) < len(weightsMagic)+4 {
		return nil, fmt.Errorf("truncated: %d bytes", len(b))
	}
	if !bytes.Equal(b[:len(weightsMagic)], weightsMagic) {
		return nil, errors.New("not a lanthorn weights blob (bad magic or version)")
	}
	off := len(weightsMagic)
	count := int(binary.LittleEndian.Uint32(b[off:]))
	off += 4
	if count > (len(b)-off)/minEntrySize {
		return nil, fmt.Errorf("truncated: %d entries declared in %d bytes", count, len(b))
	}
	w := &Weights{names: make([]string, 0, count), vectors: make(map[string][]float64, count)}
	need := func(n int, what string) error {
		if n > len(b)-off {
			return fmt.Errorf("truncated in %s at byte %d", what, off)
		}
		return nil
	}
	for i := 0; i < count; i++ {
		if err := need(2, fmt.Sprintf("entry %d", i)); err != nil {
			return nil, err
		}
		nl := int(binary.LittleEndian.Uint16(b[off:]))
		off += 2
		if err := need(nl, fmt.Sprintf("the name of entry %d", i)); err != nil {
			return nil, err
		}
		name := string(b[off : off+nl])
		off += nl
		if name == "" {
			return nil, fmt.Errorf("entry %d has an empty name", i)
		}
		if _, dup := w.vectors[name]; dup {
			return nil, fmt.Errorf("%q appears twice", name)
		}
		if err := need(4, fmt.Sprintf("%q", name)); err != nil {
			return nil, err
		}
		n := int(binary.LittleEndian.Uint32(b[off:]))
		off += 4
		if n > (len(b)-off)/8 {
			return nil, fmt.Errorf("truncated in %q: %d values declared, %d bytes left", name, n, len(b)-off)
		}
		v := make([]float64, n)
		for j := range v {
			v[j] = math.Float64frombits(binary.LittleEndian.Uint64(b[off:]))
			off += 8
			if math.IsNaN(v[j]) || math.IsInf(v[j], 0) {
				return nil, fmt.Errorf("%q[%d] is %v", name, j, v[j])
			}
		}
		w.names = append(w.names, name)
		w.vectors[name] = v
	}
	if off != len(b) {
		return nil, fmt.Errorf("%d bytes after the last entry", len(b)-off)
	}
	return w, nil
}

// Names returns the entry names in blob order.
func (w *Weights) Names() []string {
	if w == nil {
		return nil
	}
	return slices.Clone(w.names)
}

// Vector returns a copy of the named vector.
func (w *Weights) Vector(name string) ([]float64, error) {
	if w == nil {
		return nil, fmt.Errorf("weight %q: no weights loaded", name)
	}
	v, ok := w.vectors[name]
	if !ok {
		return nil, fmt.Errorf("weight %q: not in the weights blob", name)
	}
	return slices.Clone(v), nil
}

// Matrix returns the named vector as a rows×cols matrix, row-major.
func (w *Weights) Matrix(name string, rows, cols int) ([][]float64, error) {
	v, err := w.Vector(name)
	if err != nil {
		return nil, err
	}
	fits := rows >= 0 && cols >= 0
	if rows == 0 || cols == 0 {
		fits = fits && len(v) == 0
	} else {
		fits = fits && len(v)%cols == 0 && len(v)/cols == rows
	}
	if !fits {
		return nil, fmt.Errorf("weight %q: %d values, not a %d×%d matrix", name, len(v), rows, cols)
	}
	m := make([][]float64, rows)
	for i := range m {
		m[i] = v[i*cols : (i+1)*cols : (i+1)*cols]
	}
	return m, nil
}
