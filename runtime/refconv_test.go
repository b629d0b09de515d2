package runtime

import (
	"testing"

	"github.com/stretchr/testify/require"
)

func refOver(t *testing.T, names []string, vecs [][]float64) *Reference {
	t.Helper()
	blob, err := BuildWeights(names, vecs)
	require.NoError(t, err)
	w, err := ParseWeights(blob, sha256Hex(blob))
	require.NoError(t, err)
	return NewReference(w)
}

// Worked examples, computed by hand: the input is 1..9 on a 3×3 grid.
func TestConv2DWorkedExample(t *testing.T) {
	x := []float64{1, 2, 3, 4, 5, 6, 7, 8, 9}
	// Kernel [[1, 0], [0, 1]] adds a pixel and its lower-right neighbour:
	// 1+5, 2+6, 4+8, 5+9, plus the bias 0.5.
	r := refOver(t, []string{"k", "b"}, [][]float64{{1, 0, 0, 1}, {0.5}})
	y := r.Conv2D(x, Conv2DShape{In: [3]int{1, 3, 3}, Out: 1, Kernel: [2]int{2, 2}, Stride: [2]int{1, 1}}, "k", "b")
	require.NoError(t, r.Err())
	require.Equal(t, []float64{6.5, 8.5, 12.5, 14.5}, y)

	// Padding 1 on every side, stride 2, a 3×3 kernel of ones: each output
	// sums the 3×3 window around pixels (0,0), (0,2), (2,0), (2,2).
	r = refOver(t, []string{"k", "b"}, [][]float64{{1, 1, 1, 1, 1, 1, 1, 1, 1}, {0}})
	y = r.Conv2D(x, Conv2DShape{In: [3]int{1, 3, 3}, Out: 1, Kernel: [2]int{3, 3}, Stride: [2]int{2, 2}, Pad: [4]int{1, 1, 1, 1}}, "k", "b")
	require.NoError(t, r.Err())
	require.Equal(t, []float64{1 + 2 + 4 + 5, 2 + 3 + 5 + 6, 4 + 5 + 7 + 8, 5 + 6 + 8 + 9}, y)

	// Two input channels (the second is the first times 10) into two output
	// channels with 1×1 kernels [1, 0] and [0, 1]: the channels swap order.
	x2 := append(append([]float64(nil), x...), 10, 20, 30, 40, 50, 60, 70, 80, 90)
	r = refOver(t, []string{"k", "b"}, [][]float64{{0, 1, 1, 0}, {0, 0}})
	y = r.Conv2D(x2, Conv2DShape{In: [3]int{2, 3, 3}, Out: 2, Kernel: [2]int{1, 1}, Stride: [2]int{1, 1}}, "k", "b")
	require.NoError(t, r.Err())
	require.Equal(t, append(x2[9:], x...), y)

	r = refOver(t, []string{"k", "b"}, [][]float64{{1}, {0}})
	r.Conv2D(x, Conv2DShape{In: [3]int{1, 3, 3}, Out: 1, Kernel: [2]int{4, 4}, Stride: [2]int{1, 1}}, "k", "b")
	require.ErrorContains(t, r.Err(), "does not fit")
}

func TestPoolsWorkedExample(t *testing.T) {
	x := []float64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16} // 4×4
	r := refOver(t, nil, nil)
	s := PoolShape{In: [3]int{1, 4, 4}, Kernel: [2]int{2, 2}, Stride: [2]int{2, 2}}
	require.Equal(t, []float64{14, 22, 46, 54}, r.SumPool(x, s))
	require.Equal(t, []float64{3.5, 5.5, 11.5, 13.5}, r.AvgPool(x, s))
	require.NoError(t, r.Err())
}

// y = γ(x − mean)/sqrt(var + ε) + β with var + ε = 4: (x − 1)/2·3 + 1.
func TestBatchNormWorkedExample(t *testing.T) {
	r := refOver(t, []string{"g", "b", "m", "v"}, [][]float64{{3}, {1}, {1}, {3.5}})
	y := r.BatchNorm([]float64{1, 3, 5}, 1, "g", "b", "m", "v", 0.5)
	require.NoError(t, r.Err())
	require.Equal(t, []float64{1, 4, 7}, y)
	require.Equal(t, []float64{2, 4}, r.Scale([]float64{1, 2}, 2))
}
