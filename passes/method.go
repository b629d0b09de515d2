package passes

// Method is how a linear layer multiplies its matrix with the encrypted
// vector.
type Method string

const (
	// BSGS is the diagonal method with a baby-step giant-step split over
	// the whole period.
	BSGS Method = "bsgs"
	// Blocks folds the matrix into blocks of nextPow2(out) rows, then
	// replicates and sums the partial results by log2(period/block)
	// rotations: fewer diagonals for short outputs (blockDiags).
	Blocks Method = "blocks"
)

// useBlocks tells lower whether the layer named name takes the block
// method, given the rotations each method needs: the selection's choice
// when it made one, otherwise the method with fewer rotations.
func useBlocks(chosen map[string]Method, name string, bsgsRotations, blockRotations int) bool {
	if m, ok := chosen[name]; ok {
		return m == Blocks
	}
	return blockRotations < bsgsRotations
}
