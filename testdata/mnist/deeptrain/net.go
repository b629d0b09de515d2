package main

import (
	"math"
	"math/rand/v2"
)

const (
	side     = 28
	kernel   = 3
	chans    = 8
	convSide = side - kernel + 1 // 26: stride 1, no padding
	convN    = convSide * convSide
	poolSide = convSide / 2 // 13: 2×2 windows, stride 2
	poolN    = poolSide * poolSide
	feat     = chans * poolN // 1352
	hidden   = 64
	classes  = 10
	bnEps    = 1e-5 // the spec's default batch-norm epsilon
)

// net holds the trainable parameters; a gradient has the same layout. The
// convolution and dense1 have no bias: the batch norm after each adds β.
type net struct {
	K      []float64 // chans × kernel × kernel (one input channel)
	G1, B1 []float64 // norm1 γ, β: chans
	W1     []float64 // hidden × feat
	G2, B2 []float64 // norm2 γ, β: hidden
	W2     []float64 // classes × hidden
	C2     []float64 // classes
}

func (n *net) params() [][]float64 {
	return [][]float64{n.K, n.G1, n.B1, n.W1, n.G2, n.B2, n.W2, n.C2}
}

func zeroNet() *net {
	return &net{
		K: make([]float64, chans*kernel*kernel), G1: make([]float64, chans), B1: make([]float64, chans),
		W1: make([]float64, hidden*feat), G2: make([]float64, hidden), B2: make([]float64, hidden),
		W2: make([]float64, classes*hidden), C2: make([]float64, classes),
	}
}

func newNet(r *rand.Rand) *net {
	n := zeroNet()
	fill := func(v []float64, s float64) {
		for i := range v {
			v[i] = r.NormFloat64() * s
		}
	}
	// He initialisation, std sqrt(2 / fan-in) (common practice).
	fill(n.K, math.Sqrt(2.0/(kernel*kernel)))
	fill(n.W1, math.Sqrt(2.0/feat))
	fill(n.W2, math.Sqrt(2.0/hidden))
	for i := range n.G1 {
		n.G1[i] = 1
	}
	for i := range n.G2 {
		n.G2[i] = 1
	}
	return n
}

// norms are a batch norm's statistics per channel: the batch's own while
// training, the training set's (population) for inference and export.
type norms struct {
	mean, vari []float64
}

// sample holds one image's intermediate values.
type sample struct {
	z1, xh1, y1, a1 [chans * convN]float64 // conv, normalised, pre-activation, activation
	p1              [feat]float64          // pooled
	z2, xh2, y2, a2 [hidden]float64
	out             [classes]float64
}

// conv computes the convolution of one image into s.z1.
func (n *net) conv(img []float64, s *sample) {
	for c := range chans {
		k := n.K[c*kernel*kernel : (c+1)*kernel*kernel]
		for i := range convSide {
			for j := range convSide {
				var v float64
				for u := range kernel {
					row := img[(i+u)*side+j : (i+u)*side+j+kernel]
					for w, x := range row {
						v += float64(k[u*kernel+w] * x)
					}
				}
				s.z1[c*convN+i*convSide+j] = v
			}
		}
	}
}

// stage1 normalises s.z1 with st, applies the activation and pools.
func (n *net) stage1(s *sample, st norms, act *activation) {
	for c := range chans {
		inv := 1 / math.Sqrt(st.vari[c]+bnEps)
		for k := c * convN; k < (c+1)*convN; k++ {
			s.xh1[k] = (s.z1[k] - st.mean[c]) * inv
			s.y1[k] = float64(n.G1[c]*s.xh1[k]) + n.B1[c]
			s.a1[k] = act.value(s.y1[k])
		}
		for i := range poolSide {
			for j := range poolSide {
				k := c*convN + 2*i*convSide + 2*j
				s.p1[c*poolN+i*poolSide+j] = (s.a1[k] + s.a1[k+1] + s.a1[k+convSide] + s.a1[k+convSide+1]) / 4
			}
		}
	}
}

// dense1 computes s.z2 from s.p1.
func (n *net) dense1(s *sample) {
	for h := range hidden {
		var v float64
		for k, w := range n.W1[h*feat : (h+1)*feat] {
			v += float64(w * s.p1[k])
		}
		s.z2[h] = v
	}
}

// stage2 normalises s.z2 with st, applies the activation and computes the
// logits.
func (n *net) stage2(s *sample, st norms, act *activation) {
	for h := range hidden {
		s.xh2[h] = (s.z2[h] - st.mean[h]) / math.Sqrt(st.vari[h]+bnEps)
		s.y2[h] = float64(n.G2[h]*s.xh2[h]) + n.B2[h]
		s.a2[h] = act.value(s.y2[h])
	}
	for o := range classes {
		v := n.C2[o]
		for h, w := range n.W2[o*hidden : (o+1)*hidden] {
			v += float64(w * s.a2[h])
		}
		s.out[o] = v
	}
}

// acts are the two activations, relu1's and relu2's.
type acts [2]*activation

// infer runs one image through the network with fixed statistics.
func (n *net) infer(img []float64, s *sample, st1, st2 norms, act acts) {
	n.conv(img, s)
	n.stage1(s, st1, act[0])
	n.dense1(s)
	n.stage2(s, st2, act[1])
}

// batchStats returns the mean and (biased) variance per channel of the
// values get(b, c) yields for every sample b of the batch.
func batchStats(nb, nc, per int, get func(b, c int) []float64) norms {
	st := norms{mean: make([]float64, nc), vari: make([]float64, nc)}
	m := float64(nb * per)
	for c := range nc {
		var sum float64
		for b := range nb {
			for _, v := range get(b, c) {
				sum += v
			}
		}
		mu := sum / m
		var sq float64
		for b := range nb {
			for _, v := range get(b, c) {
				sq += float64((v - mu) * (v - mu))
			}
		}
		st.mean[c], st.vari[c] = mu, sq/m
	}
	return st
}

// trainBatch runs a batch forward with batch statistics in the norms, adds
// the gradient of the mean softmax cross-entropy to g and returns the
// summed loss. The activation's training derivative is used in backward.
func (n *net) trainBatch(imgs [][]float64, labels []int, ss []sample, g *net, act acts) float64 {
	nb := len(imgs)
	for b, img := range imgs {
		n.conv(img, &ss[b])
	}
	st1 := batchStats(nb, chans, convN, func(b, c int) []float64 { return ss[b].z1[c*convN : (c+1)*convN] })
	for b := range nb {
		n.stage1(&ss[b], st1, act[0])
		n.dense1(&ss[b])
	}
	st2 := batchStats(nb, hidden, 1, func(b, h int) []float64 { return ss[b].z2[h : h+1] })
	for b := range nb {
		n.stage2(&ss[b], st2, act[1])
	}

	var loss float64
	dY2 := make([][hidden]float64, nb)
	for b := range nb {
		s := &ss[b]
		m := s.out[0]
		for _, v := range s.out {
			m = math.Max(m, v)
		}
		var p [classes]float64
		var z float64
		for o, v := range s.out {
			p[o] = math.Exp(v - m)
			z += p[o]
		}
		loss -= math.Log(p[labels[b]] / z)
		var dA2 [hidden]float64
		for o := range classes {
			d := p[o] / z
			if o == labels[b] {
				d--
			}
			d /= float64(nb)
			g.C2[o] += d
			row, grow := n.W2[o*hidden:(o+1)*hidden], g.W2[o*hidden:(o+1)*hidden]
			for h := range hidden {
				grow[h] += float64(d * s.a2[h])
				dA2[h] += float64(d * row[h])
			}
		}
		for h := range hidden {
			dY2[b][h] = dA2[h] * act[1].slope(s.y2[h])
		}
	}
	// norm2, per hidden unit over the batch.
	dZ2 := make([][hidden]float64, nb)
	for h := range hidden {
		var sd, sdx float64
		for b := range nb {
			d := dY2[b][h]
			g.B2[h] += d
			g.G2[h] += float64(d * ss[b].xh2[h])
			sd += float64(d * n.G2[h])
			sdx += float64(d * n.G2[h] * ss[b].xh2[h])
		}
		inv := 1 / math.Sqrt(st2.vari[h]+bnEps)
		m := float64(nb)
		for b := range nb {
			dxh := dY2[b][h] * n.G2[h]
			dZ2[b][h] = inv / m * (m*dxh - sd - ss[b].xh2[h]*sdx)
		}
	}
	// dense1 and the pool, then the activation: dY1 per sample.
	dY1 := make([][chans * convN]float64, nb)
	for b := range nb {
		s := &ss[b]
		var dP1 [feat]float64
		for h := range hidden {
			d := dZ2[b][h]
			row, grow := n.W1[h*feat:(h+1)*feat], g.W1[h*feat:(h+1)*feat]
			for k := range feat {
				grow[k] += float64(d * s.p1[k])
				dP1[k] += float64(d * row[k])
			}
		}
		for c := range chans {
			for i := range poolSide {
				for j := range poolSide {
					d := dP1[c*poolN+i*poolSide+j] / 4
					k := c*convN + 2*i*convSide + 2*j
					for _, q := range [4]int{k, k + 1, k + convSide, k + convSide + 1} {
						dY1[b][q] = d * act[0].slope(s.y1[q])
					}
				}
			}
		}
	}
	// norm1, per channel over the batch and the positions; then the kernel.
	m := float64(nb * convN)
	for c := range chans {
		var sd, sdx float64
		for b := range nb {
			for k := c * convN; k < (c+1)*convN; k++ {
				d := dY1[b][k]
				g.B1[c] += d
				g.G1[c] += float64(d * ss[b].xh1[k])
				sd += float64(d * n.G1[c])
				sdx += float64(d * n.G1[c] * ss[b].xh1[k])
			}
		}
		inv := 1 / math.Sqrt(st1.vari[c]+bnEps)
		gk := g.K[c*kernel*kernel : (c+1)*kernel*kernel]
		for b, img := range imgs {
			for i := range convSide {
				for j := range convSide {
					k := c*convN + i*convSide + j
					dz := inv / m * (m*dY1[b][k]*n.G1[c] - sd - ss[b].xh1[k]*sdx)
					for u := range kernel {
						row := img[(i+u)*side+j : (i+u)*side+j+kernel]
						for w, x := range row {
							gk[u*kernel+w] += float64(dz * x)
						}
					}
				}
			}
		}
	}
	return loss
}

// adam is the Adam optimiser (Kingma and Ba, 2015; β1 0.9, β2 0.999, ε 1e-8,
// the paper's defaults, from memory).
type adam struct {
	m, v *net
	t    int
}

func (o *adam) step(n, g *net, lr float64) {
	o.t++
	b1, b2 := 0.9, 0.999
	c1, c2 := 1-math.Pow(b1, float64(o.t)), 1-math.Pow(b2, float64(o.t))
	ps, gs, ms, vs := n.params(), g.params(), o.m.params(), o.v.params()
	for i := range ps {
		for k := range ps[i] {
			gk := gs[i][k]
			ms[i][k] = b1*ms[i][k] + (1-b1)*gk
			vs[i][k] = b2*vs[i][k] + (1-b2)*gk*gk
			ps[i][k] -= lr * (ms[i][k] / c1) / (math.Sqrt(vs[i][k]/c2) + 1e-8)
		}
	}
}
