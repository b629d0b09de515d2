package main

import (
	"flag"
	"fmt"
)

// maxChunkFlag bounds -chunk-slots: the slots of the largest ring the
// planner considers (2^15).
const maxChunkFlag = 1 << 14

// chunkFlag adds -chunk-slots, the cap on the values one ciphertext holds.
func chunkFlag(fs *flag.FlagSet) *int {
	return fs.Int("chunk-slots", 0, "split vectors wider than `N` values (rounded up to a power of two) over several ciphertexts,\n"+
		"so that a smaller ring can hold them; 0: split only beyond the pinned or the largest ring")
}

// chunkSlots checks the flag's value for Options.ChunkSlots.
func chunkSlots(n int) (int, error) {
	if n < 0 || n > maxChunkFlag {
		return 0, fmt.Errorf("-chunk-slots %d: want 0 (no cap) to %d values", n, maxChunkFlag)
	}
	return n, nil
}
