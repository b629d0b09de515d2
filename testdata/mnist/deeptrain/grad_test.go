package main

import (
	"math"
	"math/rand/v2"
	"testing"
)

// The analytic gradient of trainBatch matches central differences of the
// loss (common practice for checking backpropagation), with the exact ReLU
// and with the interpolant.
func TestGradient(t *testing.T) {
	for _, tc := range []struct {
		name string
		act  acts
	}{
		{"relu", acts{relu(), relu()}},
		{"poly", acts{polyReLU(-3, 5, 7), polyReLU(-4, 4, 7)}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			r := rand.New(rand.NewPCG(1, 2))
			n := newNet(r)
			for i := range n.B1 {
				n.B1[i] = 0.3 * r.NormFloat64()
				n.G1[i] = 1 + 0.2*r.NormFloat64()
			}
			imgs := make([][]float64, 4)
			labels := []int{1, 7, 3, 3}
			for b := range imgs {
				imgs[b] = make([]float64, side*side)
				for k := range imgs[b] {
					imgs[b][k] = r.Float64()
				}
			}
			ss := make([]sample, len(imgs))
			g := zeroNet()
			n.trainBatch(imgs, labels, ss, g, tc.act)
			loss := func() float64 {
				return n.trainBatch(imgs, labels, ss, zeroNet(), tc.act) / float64(len(imgs))
			}
			ps, gs := n.params(), g.params()
			for i := range ps {
				for _, k := range []int{0, len(ps[i]) / 2, len(ps[i]) - 1} {
					old := ps[i][k]
					const h = 1e-5
					ps[i][k] = old + h
					up := loss()
					ps[i][k] = old - h
					down := loss()
					ps[i][k] = old
					num := (up - down) / (2 * h)
					if math.Abs(num-gs[i][k]) > 1e-5+1e-3*math.Abs(num) {
						t.Errorf("param %d[%d]: analytic %g, numeric %g", i, k, gs[i][k], num)
					}
				}
			}
		})
	}
}
