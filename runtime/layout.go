package runtime

import (
	"errors"
	"fmt"
	"math"
)

// Layout says where a vector's elements sit in ciphertext slots: element i
// lies in ciphertext i / Chunk at slot i % Chunk + k·Pitch + m·Period, for
// every copy k < Copies and every m < Slots/Period. It is the generator's
// ir.Layout, repeated here because the runtime imports nothing of the
// generator; the emitted ModelInfo carries the program's input and output
// layouts.
type Layout struct {
	Size   int // elements
	Chunk  int // elements per ciphertext; the last ciphertext may hold fewer
	Copies int // copies of each chunk inside one period, Pitch slots apart (1 = no copies)
	Pitch  int
	Period int // the block of slots repeated over all slots (power of two dividing the slot count)
}

// maxCiphertexts bounds the ciphertexts of one vector, so that a layout or
// a file header cannot ask for an absurd allocation.
const maxCiphertexts = 1 << 12

// Count is the number of ciphertexts the vector takes (0 for an invalid
// layout).
func (l Layout) Count() int {
	if l.Size <= 0 || l.Chunk <= 0 {
		return 0
	}
	return (l.Size + l.Chunk - 1) / l.Chunk
}

// Validate checks the layout for a ring of slots slots: positive sizes, a
// power-of-two period dividing the slot count, copies that fit the period
// without overlapping, and at most maxCiphertexts ciphertexts.
func (l Layout) Validate(slots int) error {
	var errs []error
	if l.Size <= 0 {
		errs = append(errs, fmt.Errorf("size %d, want at least 1", l.Size))
	}
	if l.Chunk <= 0 {
		errs = append(errs, fmt.Errorf("chunk %d, want at least 1", l.Chunk))
	}
	if l.Copies <= 0 {
		errs = append(errs, fmt.Errorf("copies %d, want at least 1", l.Copies))
	}
	if l.Pitch < 0 {
		errs = append(errs, fmt.Errorf("pitch %d, want at least 0", l.Pitch))
	}
	if l.Period <= 0 || l.Period&(l.Period-1) != 0 {
		errs = append(errs, fmt.Errorf("period %d, want a power of two", l.Period))
	} else if l.Period > slots || slots%l.Period != 0 {
		errs = append(errs, fmt.Errorf("period %d does not divide the %d slots", l.Period, slots))
	}
	if l.Copies > 1 && l.Pitch < l.Chunk {
		errs = append(errs, fmt.Errorf("%d copies %d slots apart overlap chunks of %d", l.Copies, l.Pitch, l.Chunk))
	}
	if len(errs) == 0 {
		// Computed in float64: a hostile Copies·Pitch must not overflow.
		if span := float64(l.Copies-1)*float64(l.Pitch) + float64(l.Chunk); span > float64(l.Period) {
			errs = append(errs, fmt.Errorf("%d copies of %d elements, %d slots apart, span %.0f slots, more than the period %d", l.Copies, l.Chunk, l.Pitch, span, l.Period))
		}
		if n := l.Count(); n > maxCiphertexts {
			errs = append(errs, fmt.Errorf("%d ciphertexts, at most %d", n, maxCiphertexts))
		}
	}
	if err := errors.Join(errs...); err != nil {
		return fmt.Errorf("layout: %w", err)
	}
	return nil
}

// pack returns the slot vectors of values under l, one per ciphertext.
func (l Layout) pack(slots int, values []float64) ([][]float64, error) {
	if err := l.Validate(slots); err != nil {
		return nil, err
	}
	if len(values) != l.Size {
		return nil, fmt.Errorf("%d values for a layout of %d", len(values), l.Size)
	}
	out := make([][]float64, l.Count())
	for j := range out {
		out[j] = make([]float64, slots)
	}
	for i, v := range values {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("value %d is %v", i, v)
		}
		s := out[i/l.Chunk]
		for k := 0; k < l.Copies; k++ {
			for at := i%l.Chunk + k*l.Pitch; at < slots; at += l.Period {
				s[at] = v
			}
		}
	}
	return out, nil
}

// unpack reads the elements of l from decoded slot vectors: element i at
// ciphertext i / Chunk, slot i % Chunk (the first copy).
func (l Layout) unpack(slots [][]float64) []float64 {
	out := make([]float64, l.Size)
	for i := range out {
		out[i] = slots[i/l.Chunk][i%l.Chunk]
	}
	return out
}
