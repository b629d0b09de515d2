package ir

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// Outside check: the direct convolution equals the im2col formulation (one
// column per output position holding its zero-padded input window),
// multiplied by the kernel matrix with gonum's general matrix product.
func TestConv2DAgainstIm2colGonum(t *testing.T) {
	r := rand.New(rand.NewPCG(4, 2))
	for _, c := range []struct {
		in  []int
		out int
		w   Window
	}{
		{[]int{1, 6, 6}, 2, Window{KH: 3, KW: 3, SH: 1, SW: 1}},
		{[]int{2, 7, 5}, 3, Window{KH: 3, KW: 2, SH: 2, SW: 1, Pad: [4]int{1, 0, 2, 1}}},
		{[]int{1, 28, 28}, 5, Window{KH: 5, KW: 5, SH: 2, SW: 2, Pad: [4]int{1, 1, 1, 1}}},
	} {
		C, H, W := c.in[0], c.in[1], c.in[2]
		OH, OW := c.w.OutHW(H, W)
		l := &Layer{Kind: Conv2D, In: C * H * W, Out: c.out * OH * OW, InShape: c.in, OutShape: []int{c.out, OH, OW}, Window: &c.w}
		l.Kernel = make([]float64, c.out*C*c.w.KH*c.w.KW)
		for i := range l.Kernel {
			l.Kernel[i] = r.Float64()*2 - 1
		}
		l.Bias = make([]float64, c.out)
		for i := range l.Bias {
			l.Bias[i] = r.Float64()
		}
		x := make([]float64, l.In)
		for i := range x {
			x[i] = r.Float64()
		}
		if err := verifyLayer(l); err != nil {
			t.Fatal(err)
		}
		got := l.Eval(x)
		K := C * c.w.KH * c.w.KW
		cols := mat.NewDense(K, OH*OW, nil)
		for i := range OH {
			for j := range OW {
				for ch := range C {
					for a := range c.w.KH {
						for b := range c.w.KW {
							y, z := i*c.w.SH+a-c.w.Pad[0], j*c.w.SW+b-c.w.Pad[2]
							if y >= 0 && y < H && z >= 0 && z < W {
								cols.Set((ch*c.w.KH+a)*c.w.KW+b, i*OW+j, x[(ch*H+y)*W+z])
							}
						}
					}
				}
			}
		}
		var want mat.Dense
		want.Mul(mat.NewDense(c.out, K, l.Kernel), cols)
		for o := range c.out {
			for p := range OH * OW {
				if d := math.Abs(want.At(o, p) + l.Bias[o] - got[o*OH*OW+p]); d > 1e-12 {
					t.Fatalf("%v: output (%d, %d) off by %g", c.in, o, p, d)
				}
			}
		}
	}
}
