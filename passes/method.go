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
	// Copies is the block method over a sum of shifted copies of an input
	// whose other slots are provably zero: each entry is read from the
	// copy that puts it on one of a few folded diagonals (copies.go).
	Copies Method = "copies"
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

// useCopies tells lower whether the layer named name takes the copies
// method over the method otherwise taken: the selection's choice when it
// made one, otherwise when it needs fewer rotations, or as many and fewer
// plaintext products.
func useCopies(chosen map[string]Method, name string, rotations, products, copyRotations, copyProducts int) bool {
	if m, ok := chosen[name]; ok {
		return m == Copies
	}
	return copyRotations < rotations || copyRotations == rotations && copyProducts < products
}
