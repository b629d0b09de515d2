package passes

import (
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// placement puts output r of a layer at slot At[r] of a vector of Size
// slots; the other slots hold zeros (or what elementwise layers make of
// them) and no later layer reads them.
type placement struct {
	At    []int
	Size  int
	Block int // slots per output channel, for a convolution's spread layout
}

// convPlacement is the spread layout of a convolution's output: value
// (o, i, j) at o·B + i·SH·W + j·SW, with the input's row pitch W and one
// block of B slots per output channel. Then the matrix entry of kernel tap
// (c, a, b) lies on diagonal c·H·W − o·B + (a − top)·W + (b − left) whatever
// (i, j): at most O·C·KH·KW diagonals, where the packed layout of a strided
// convolution (row pitch OW ≠ W) spreads them over almost all of D. It is
// not possible when a row of outputs is wider than SH input rows.
//
// A convolution that reads the model's input takes blocks at least as long
// as the input, B ≥ C·H·W, so that the client can encrypt one copy of the
// input per output channel, B slots apart (see inputCopies).
func convPlacement(l *ir.Layer, readsInput bool) (placement, bool) {
	in, o, w := l.Ins(), l.Outs(), l.Window
	W := in[2]
	if (o[2]-1)*w.SW >= w.SH*W {
		return placement{}, false
	}
	B := (o[1]-1)*w.SH*W + (o[2]-1)*w.SW + 1
	if readsInput {
		B = max(B, l.In)
	}
	pl := placement{At: make([]int, 0, l.Out), Size: o[0] * B, Block: B}
	for oc := range o[0] {
		for i := range o[1] {
			for j := range o[2] {
				pl.At = append(pl.At, oc*B+i*w.SH*W+j*w.SW)
			}
		}
	}
	return pl, true
}

// spread lays the output of each candidate convolution out by its
// placement when that at least halves its number of distinct diagonals
// and a linear layer reads it (after elementwise layers only): rows move to
// their slots, elementwise layers in between are widened, and the columns
// of the reading layer move with them. The reading layer's own output is
// packed again, so the program's output is unchanged.
func spread(s *State, layers []*ir.Layer, cands map[*ir.Layer]placement) []*ir.Layer {
	for i, l := range layers {
		pl, ok := cands[l]
		if !ok {
			continue
		}
		j := i + 1
		for j < len(layers) && elementwise(layers[j]) {
			j++
		}
		if j == len(layers) || !(layers[j].Kind == ir.Dense || layers[j].Kind == ir.Linear) {
			continue
		}
		moved := moveRows(l.Map, pl)
		before, after := countDiagonals(l.Map), countDiagonals(moved)
		if 2*after > before {
			continue
		}
		l.Map, l.Out = moved, pl.Size
		if i == 0 && pl.Block >= l.In {
			l.RowBlock = pl.Block
		}
		if l.Bias != nil {
			b := make([]float64, pl.Size)
			for r, v := range l.Bias {
				b[pl.At[r]] = v
			}
			l.Bias = b
		}
		for _, e := range layers[i+1 : j] {
			widen(e, pl)
		}
		moveColumns(layers[j], pl)
		s.note("%s: output spread over %d slots with the input's row pitch: %d diagonals instead of %d", l.Name, pl.Size, after, before)
	}
	return layers
}

// elementwise reports whether a layer acts on each value alone: an
// activation or a diagonal linear map.
func elementwise(l *ir.Layer) bool {
	if l.Kind == ir.Activation {
		return true
	}
	if l.Kind != ir.Linear || l.In != l.Out {
		return false
	}
	for r, row := range l.Map.Row {
		if len(row) > 1 || len(row) == 1 && row[0].Col != r {
			return false
		}
	}
	return true
}

// widen makes an elementwise layer act on the placed vector.
func widen(l *ir.Layer, pl placement) {
	l.In, l.Out = pl.Size, pl.Size
	if l.Kind != ir.Linear {
		return
	}
	m := &ir.SparseMap{Rows: pl.Size, Cols: pl.Size, Row: make([][]ir.Entry, pl.Size)}
	b := make([]float64, pl.Size)
	for r, row := range l.Map.Row {
		if len(row) == 1 {
			m.Row[pl.At[r]] = []ir.Entry{{Col: pl.At[r], Val: row[0].Val}}
		}
		if l.Bias != nil {
			b[pl.At[r]] = l.Bias[r]
		}
	}
	l.Map, l.Bias = m, b
}

// moveRows returns m with row r at row At[r] of a Size-row matrix.
func moveRows(m *ir.SparseMap, pl placement) *ir.SparseMap {
	out := &ir.SparseMap{Rows: pl.Size, Cols: m.Cols, Row: make([][]ir.Entry, pl.Size)}
	for r, row := range m.Row {
		out.Row[pl.At[r]] = row
	}
	return out
}

// moveColumns makes a dense or linear layer read input c at slot At[c].
func moveColumns(l *ir.Layer, pl placement) {
	if l.Kind == ir.Dense {
		for r, row := range l.Weights {
			wide := make([]float64, pl.Size)
			for c, v := range row {
				wide[pl.At[c]] = v
			}
			l.Weights[r] = wide
		}
	} else {
		for _, row := range l.Map.Row {
			for k := range row {
				row[k].Col = pl.At[row[k].Col]
			}
			slices.SortFunc(row, func(a, b ir.Entry) int { return a.Col - b.Col })
		}
		l.Map.Cols = pl.Size
	}
	l.In = pl.Size
}

// countDiagonals counts the distinct diagonals (c − r) mod D of a matrix
// laid out in the smallest power-of-two period holding it.
func countDiagonals(m *ir.SparseMap) int {
	D := nextPow2(max(m.Rows, m.Cols))
	seen := map[int]bool{}
	for r, row := range m.Row {
		for _, e := range row {
			seen[((e.Col-r)%D+D)%D] = true
		}
	}
	return len(seen)
}
