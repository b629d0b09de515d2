package passes

import (
	"github.com/lanthorn/lanthorn/ir"
)

// inputCopies decides whether the client encrypts one copy of the input
// per output channel of the first layer, RowBlock slots apart, and returns
// the number of copies and their pitch (1 and 0 for a single copy).
//
// A spread convolution puts output (o, i, j) at o·B + i·SH·W + j·SW. Read
// from a single copy of the input, kernel tap (c, a, b) of channel o lies on
// diagonal c·H·W + (a − top)·W + (b − left) − o·B, one per output channel;
// read from the copy that starts at o·B, the o·B cancels and every channel
// shares the tap's diagonal: C·KH·KW diagonals in all instead of
// O·C·KH·KW, so O times fewer plaintext products and far fewer rotations,
// for O times the input's slots (which the spread layout already spans).
// The copies are chosen only when they at least halve the diagonals.
func inputCopies(l *ir.Layer, D int) (copies, pitch int) {
	if l.Kind != ir.Linear || l.RowBlock <= 0 || l.RowBlock < l.In {
		return 1, 0
	}
	copies = (l.Out + l.RowBlock - 1) / l.RowBlock
	if copies < 2 || copies*l.RowBlock > D {
		return 1, 0
	}
	single, shared := map[int]bool{}, map[int]bool{}
	for t, row := range l.Map.Row {
		for _, e := range row {
			single[((e.Col-t)%D+D)%D] = true
			shared[((copyColumn(e.Col, t, l.RowBlock)-t)%D+D)%D] = true
		}
	}
	if 2*len(shared) > len(single) {
		return 1, 0
	}
	return copies, l.RowBlock
}

// copyColumn is the slot that row t reads input element c from when the
// input is copied every pitch slots: the copy of t's own block.
func copyColumn(c, t, pitch int) int {
	if pitch == 0 {
		return c
	}
	return c + t/pitch*pitch
}
