package ir

import (
	"testing"

	"github.com/stretchr/testify/require"
)

func TestLayoutValidate(t *testing.T) {
	for _, c := range []struct {
		name  string
		l     Layout
		slots int
		want  string // "" for valid
	}{
		{"packed", PackedLayout(3000, 2048, 2048), 2048, ""},
		{"copies", Layout{Size: 10, Chunk: 10, Copies: 3, Pitch: 16, Period: 64}, 64, ""},
		{"no size", PackedLayout(0, 4, 4), 4, "size 0"},
		{"no chunk", PackedLayout(4, 0, 4), 4, "chunk 0"},
		{"no copies", Layout{Size: 4, Chunk: 4, Period: 4}, 4, "copies 0"},
		{"period not a power of two", PackedLayout(4, 4, 6), 0, "power of two"},
		{"period beyond the slots", PackedLayout(4, 4, 16), 8, "does not divide the 8 slots"},
		{"chunk beyond the period", PackedLayout(9, 9, 8), 8, "more than the period 8"},
		{"copies overlap", Layout{Size: 4, Chunk: 4, Copies: 2, Pitch: 3, Period: 16}, 16, "overlap"},
		{"copies beyond the period", Layout{Size: 4, Chunk: 4, Copies: 3, Pitch: 8, Period: 16}, 16, "span 20 slots"},
		{"negative pitch", Layout{Size: 4, Chunk: 4, Copies: 1, Pitch: -2, Period: 16}, 16, "pitch -2"},
	} {
		t.Run(c.name, func(t *testing.T) {
			err := c.l.Validate(c.slots)
			if c.want == "" {
				require.NoError(t, err)
				return
			}
			require.ErrorContains(t, err, c.want)
		})
	}
}

func TestLayoutChunks(t *testing.T) {
	l := PackedLayout(3000, 2048, 2048)
	require.Equal(t, 2, l.Count())
	require.Equal(t, 2048, l.ChunkLen(0))
	require.Equal(t, 952, l.ChunkLen(1))
	require.Equal(t, 0, l.ChunkLen(2))
	require.Equal(t, "3000 in 2 × 2048, period 2048", l.String())
	require.Equal(t, 0, Layout{}.Count())
}

// A program over two input chunks and one output chunk, simulated: each
// chunk is scaled by its own weights and the two are added, so output i is
// w0[i]·x[i] + w1[i]·x[4+i].
func TestSimulateChunks(t *testing.T) {
	p := &Program{Name: "t", Period: 4, InputSize: 6, OutputSize: 2,
		Input: PackedLayout(6, 4, 4), Output: PackedLayout(2, 4, 4)}
	x0, x1 := p.NewValue("x0", Cipher, -1), p.NewValue("x1", Cipher, -1)
	m0, m1 := p.NewValue("m0", Cipher, 0), p.NewValue("m1", Cipher, 0)
	s := p.NewValue("s", Cipher, 0)
	p.Consts = []*Const{
		{Name: "w0", Kind: Vector, Data: []float64{1, 2, 0, 0}},
		{Name: "w1", Kind: Vector, Data: []float64{10, 20, 0, 0}},
	}
	p.Ops = []*Op{
		{Kind: OpInput, Results: []ValueID{x0, x1}, Const: -1},
		{Kind: OpMulPlain, Args: []ValueID{x0}, Results: []ValueID{m0}, Const: 0},
		{Kind: OpMulPlain, Args: []ValueID{x1}, Results: []ValueID{m1}, Const: 1},
		{Kind: OpAdd, Args: []ValueID{m0, m1}, Results: []ValueID{s}, Const: -1},
		{Kind: OpOutput, Args: []ValueID{s}, Const: -1},
	}
	require.NoError(t, VerifyProgram(p, Lowered))
	y, err := p.Simulate([]float64{1, 2, 3, 4, 5, 6})
	require.NoError(t, err)
	require.Equal(t, []float64{1*1 + 10*5, 2*2 + 20*6}, y)
	_, err = p.Simulate([]float64{1})
	require.ErrorContains(t, err, "program takes 6")
	require.Contains(t, p.String(), "input 6 in 2 × 4, period 4, output 2 in 1 × 4, period 4")
}
