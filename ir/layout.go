package ir

import (
	"errors"
	"fmt"
)

// Layout says where a vector's elements sit in ciphertext slots: element i
// lies in ciphertext i / Chunk at slot i % Chunk + k·Pitch + m·Period, for
// every copy k < Copies and every m < Slots/Period.
type Layout struct {
	Size   int // elements
	Chunk  int // elements per ciphertext; the last ciphertext may hold fewer
	Copies int // copies of each chunk inside one period, Pitch slots apart (1 = no copies)
	Pitch  int
	Period int // the block of slots repeated over all slots (power of two dividing the slot count)
}

// PackedLayout is the layout of n elements in chunks of chunk elements, one
// copy each, in a period of period slots: the layout every vector of a
// lowered program has.
func PackedLayout(n, chunk, period int) Layout {
	return Layout{Size: n, Chunk: chunk, Copies: 1, Period: period}
}

// Count is the number of ciphertexts the vector takes (0 for an invalid
// layout).
func (l Layout) Count() int {
	if l.Size <= 0 || l.Chunk <= 0 {
		return 0
	}
	return (l.Size + l.Chunk - 1) / l.Chunk
}

// ChunkLen is the number of elements ciphertext j holds.
func (l Layout) ChunkLen(j int) int {
	return max(0, min(l.Chunk, l.Size-j*l.Chunk))
}

// Validate checks the layout for a ring of slots slots (0: skip the checks
// that need the slot count): positive sizes, a power-of-two period dividing
// the slot count, and copies that fit the period without overlapping.
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
	if l.Period <= 0 || l.Period&(l.Period-1) != 0 {
		errs = append(errs, fmt.Errorf("period %d, want a power of two", l.Period))
	} else if slots > 0 && (l.Period > slots || slots%l.Period != 0) {
		errs = append(errs, fmt.Errorf("period %d does not divide the %d slots", l.Period, slots))
	}
	if l.Copies > 1 && l.Pitch < l.Chunk {
		errs = append(errs, fmt.Errorf("%d copies %d slots apart overlap chunks of %d", l.Copies, l.Pitch, l.Chunk))
	}
	if l.Pitch < 0 {
		errs = append(errs, fmt.Errorf("pitch %d, want at least 0", l.Pitch))
	}
	if len(errs) == 0 {
		if span := (l.Copies-1)*l.Pitch + l.Chunk; span > l.Period {
			errs = append(errs, fmt.Errorf("%d copies of %d elements, %d slots apart, span %d slots, more than the period %d", l.Copies, l.Chunk, l.Pitch, span, l.Period))
		}
	}
	if err := errors.Join(errs...); err != nil {
		return fmt.Errorf("layout: %w", err)
	}
	return nil
}

// String prints the layout as the program's text form does:
// "3000 in 2 × 2048, period 2048".
func (l Layout) String() string {
	s := fmt.Sprintf("%d in %d × %d, period %d", l.Size, l.Count(), l.Chunk, l.Period)
	if l.Copies > 1 {
		s += fmt.Sprintf(", %d copies %d apart", l.Copies, l.Pitch)
	}
	return s
}
