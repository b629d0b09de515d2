package passes

import (
	"fmt"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
	"gonum.org/v1/gonum/mat"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/spec"
)

// Vectors wider than the chunk are split over several ciphertexts; the
// cleartext simulation of the block products must agree with the float64
// reference: chunked inputs, chunked hidden layers, several output chunks,
// folded single-chunk outputs, activations on every chunk.
func TestChunkedSimulationMatchesReference(t *testing.T) {
	cases := []struct {
		chunk  int
		in     int
		widths []int
		acts   []ir.ActFunc
	}{
		{8, 20, []int{3}, nil},                                     // 3 input chunks → 1 folded output
		{8, 9, []int{8}, []ir.ActFunc{ir.Square}},                  // exactly one full output chunk
		{8, 20, []int{19, 2}, []ir.ActFunc{ir.Square}},             // 3 → 3 chunks, then 3 → 1
		{8, 5, []int{30, 4}, []ir.ActFunc{ir.Tanh}},                // 1 → 4 chunks: only the hidden layer is wide
		{16, 40, []int{17, 17, 1}, []ir.ActFunc{ir.Poly, ir.ReLU}}, // two chunks of 16 + 1
		{4, 4, []int{4}, nil},                                      // no split: the single-ciphertext path
	}
	for i, c := range cases {
		t.Run(fmt.Sprintf("chunk%d-%d-%v", c.chunk, c.in, c.widths), func(t *testing.T) {
			g := randomGraph(uint64(40+i), c.in, c.widths, c.acts)
			prog, st, err := Compile(g, Options{ChunkSlots: c.chunk})
			require.NoError(t, err)
			require.Equal(t, c.chunk, prog.Period)
			require.Equal(t, chunks(c.in, c.chunk), prog.Input.Count())
			require.Len(t, prog.Inputs(), prog.Input.Count())
			require.Len(t, prog.Outputs(), chunks(c.widths[len(c.widths)-1], c.chunk))
			for k := range 4 {
				x := randomInput(uint64(300*i+k), c.in)
				want, err := st.Model.Reference(x)
				require.NoError(t, err)
				got, err := prog.Simulate(x)
				require.NoError(t, err)
				require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9, "want %v got %v", want, got)
			}
		})
	}
}

// The rotations of each input chunk are computed once, in one hoisted
// rotation, and read by every output chunk; the giant steps of an output
// chunk are shared by all its input chunks.
func TestChunkedRotationsHoistedOncePerInputChunk(t *testing.T) {
	g := randomGraph(7, 24, []int{20}, nil) // 3 input chunks, 3 output chunks of 8
	prog, _, err := Compile(g, Options{ChunkSlots: 8})
	require.NoError(t, err)
	hoisted := map[ir.ValueID]int{}
	readers := map[ir.ValueID]map[string]bool{} // rotated value → output chunks reading it
	def := map[ir.ValueID]ir.ValueID{}          // rotated value → input chunk
	for _, op := range prog.Ops {
		if op.Kind == ir.OpRotHoisted {
			hoisted[op.Args[0]]++
			for _, r := range op.Results {
				def[r] = op.Args[0]
			}
		}
	}
	for _, x := range prog.Inputs() {
		require.Equal(t, 1, hoisted[x], "input chunk %s: one hoisted rotation", prog.Values[x].Name)
	}
	for _, op := range prog.Ops {
		args, consts := op.Args, op.Consts // a dot's products
		switch op.Kind {
		case ir.OpMulPlain:
			consts = []int{op.Const}
		case ir.OpDot:
		default:
			continue
		}
		for i, a := range args {
			if _, ok := def[a]; ok {
				if readers[a] == nil {
					readers[a] = map[string]bool{}
				}
				name := prog.Consts[consts[i]].Name // dense1.outJ.inI.diagK
				readers[a][name[:len("dense1.out0")]] = true
			}
		}
	}
	shared := 0
	for _, outs := range readers {
		if len(outs) > 1 {
			shared++
		}
	}
	require.Positive(t, shared, "some baby rotation serves several output chunks")
	// Giant steps: at most one rotation per giant block per output chunk
	// (each a term of a rotate-sum, or a rotation of its own).
	rotates := map[string]int{}
	for _, op := range prog.Ops {
		switch op.Kind {
		case ir.OpRotate:
			rotates[prog.Values[op.Results[0]].Name]++
		case ir.OpRotSum:
			for i, k := range op.Steps {
				if k != 0 {
					rotates[prog.Values[op.Args[i]].Name]++
				}
			}
		}
	}
	for name, n := range rotates {
		require.Equal(t, 1, n, name)
	}
}

// Outside check: a chunked dense layer equals y = Wx + b computed by
// gonum's mat (a general-purpose linear-algebra library).
func TestChunkedDenseAgainstGonum(t *testing.T) {
	g := randomGraph(11, 37, []int{21}, nil)
	l := g.Layers[0]
	x := randomInput(3, 37)
	flat := make([]float64, 0, 21*37)
	for _, row := range l.Weights {
		flat = append(flat, row...)
	}
	var y mat.VecDense
	y.MulVec(mat.NewDense(21, 37, flat), mat.NewVecDense(37, x))
	y.AddVec(&y, mat.NewVecDense(21, l.Bias))
	prog, _, err := Compile(g, Options{ChunkSlots: 16})
	require.NoError(t, err)
	require.Equal(t, 3, prog.Input.Count())
	require.Equal(t, 2, prog.Output.Count())
	sim, err := prog.Simulate(x)
	require.NoError(t, err)
	require.InDeltaSlice(t, y.RawVector().Data, sim, 1e-12)
}

// A sparse (convolution-like) map on a chunked vector: a banded matrix, so
// most blocks are empty and are skipped.
func TestChunkedSparseLinear(t *testing.T) {
	const n = 40
	m := &ir.SparseMap{Rows: n, Cols: n, Row: make([][]ir.Entry, n)}
	for r := range n {
		for _, c := range []int{r - 1, r, r + 1} {
			if c >= 0 && c < n {
				m.Row[r] = append(m.Row[r], ir.Entry{Col: c, Val: 0.1*float64(r%5) + 0.05*float64(c-r)})
			}
		}
	}
	g := randomGraph(5, n, []int{2}, nil)
	lin := &ir.Layer{Name: "band", Kind: ir.Linear, In: n, Out: n, Map: m, Pos: ir.Pos{File: "m.yaml", Line: 3}}
	g.Layers = append([]*ir.Layer{lin}, g.Layers...)
	prog, st, err := Compile(g, Options{ChunkSlots: 16})
	require.NoError(t, err)
	x := randomInput(8, n)
	want, err := st.Model.Reference(x)
	require.NoError(t, err)
	got, err := prog.Simulate(x)
	require.NoError(t, err)
	require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9)
	// A band of width 3 touches only blocks on and next to the diagonal.
	for _, c := range prog.Consts {
		var j, i, k int
		if _, err := fmt.Sscanf(c.Name, "band.out%d.in%d.diag%d", &j, &i, &k); err == nil {
			require.LessOrEqual(t, j-i, 1)
			require.LessOrEqual(t, i-j, 1)
		}
	}
}

// The testdata model whose input exceeds the slots of its pinned ring: two
// input ciphertexts, the simulation agrees with the float64 reference.
func TestWideModel(t *testing.T) {
	g, err := spec.Load(filepath.Join("..", "testdata", "models", "wide.yaml"))
	require.NoError(t, err)
	prog, st, err := Compile(g, Options{})
	require.NoError(t, err)
	require.Greater(t, g.Input.Size, prog.Params.Slots(), "the input must not fit one ciphertext")
	require.Equal(t, 2, prog.Input.Count())
	require.Equal(t, 1, prog.Output.Count())
	requireSimulatesReference(t, st, prog, g.Input.Size)
}

func TestChunkPeriod(t *testing.T) {
	st := func(pin int, chunk int) *State {
		g := &ir.Graph{}
		if pin > 0 {
			g.Pin = &ir.ParamPin{LogN: pin}
		}
		return &State{Graph: g, Opts: Options{ChunkSlots: chunk}}
	}
	for _, c := range []struct {
		pin, chunk, widest, want int
	}{
		{0, 0, 10, 16},
		{0, 0, 100000, 1 << 14},
		{12, 0, 3000, 2048},
		{12, 0, 100, 128},
		{0, 100, 3000, 128},
		{13, 1 << 20, 3000, 4096},
	} {
		require.Equal(t, c.want, chunkPeriod(st(c.pin, c.chunk), c.widest), "%+v", c)
	}
}

// Without a pin, a vector wider than the largest ring's 2^14 slots is
// split in chunks of 2^14 under logN 15; the folded first layer keeps its
// diagonals to B per input chunk.
func TestChunkedBeyondLargestRing(t *testing.T) {
	g := randomGraph(13, 20000, []int{2}, nil)
	prog, st, err := Compile(g, Options{})
	require.NoError(t, err)
	require.Equal(t, 1<<14, prog.Period)
	require.Equal(t, 15, prog.Params.LogN)
	require.Equal(t, 2, prog.Input.Count())
	require.LessOrEqual(t, len(prog.Consts), 2*2+1, "two folded diagonals per input chunk and a bias")
	x := randomInput(1, 20000)
	want, err := st.Model.Reference(x)
	require.NoError(t, err)
	got, err := prog.Simulate(x)
	require.NoError(t, err)
	require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9)
}
