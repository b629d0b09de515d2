package ir

// Eval applies one layer to its input in float64 with direct loops over the
// tensor (convolutions and pools loop over channels, rows, columns and the
// kernel window), independent of any lowering: it is the tensor-level view
// of correctness. The input must have l.In values.
func (l *Layer) Eval(x []float64) []float64 {
	switch l.Kind {
	case Dense:
		y := make([]float64, l.Out)
		for i, row := range l.Weights {
			sum := l.Bias[i]
			for j, w := range row {
				sum += w * x[j]
			}
			y[i] = sum
		}
		return y
	case Activation:
		y := make([]float64, len(x))
		for i, v := range x {
			y[i] = l.Act.Apply(v)
		}
		return y
	case Conv2D:
		return conv2D(l, x)
	case AvgPool, SumPool:
		return pool(l, x)
	case Flatten:
		return append([]float64(nil), x...)
	case BatchNorm:
		s, t := l.Norm.Affine()
		per := l.In / len(s)
		y := make([]float64, len(x))
		for i, v := range x {
			c := i / per
			y[i] = s[c]*v + t[c]
		}
		return y
	case ScaleBy:
		y := make([]float64, len(x))
		for i, v := range x {
			y[i] = l.Factor * v
		}
		return y
	case Linear:
		y := make([]float64, l.Out)
		for i, row := range l.Map.Row {
			sum := 0.0
			if l.Bias != nil {
				sum = l.Bias[i]
			}
			for _, e := range row {
				sum += e.Val * x[e.Col]
			}
			y[i] = sum
		}
		return y
	}
	return nil
}

// conv2D is the direct convolution (cross-correlation, as in common deep
// learning frameworks): y[o][i][j] = b[o] + Σ_{c,a,b} K[o][c][a][b] ·
// x[c][i·SH + a − top][j·SW + b − left], zero outside the input.
func conv2D(l *Layer, x []float64) []float64 {
	in, out, w := l.Ins(), l.Outs(), l.Window
	C, H, W := in[0], in[1], in[2]
	O, OH, OW := out[0], out[1], out[2]
	y := make([]float64, O*OH*OW)
	for o := range O {
		for i := range OH {
			for j := range OW {
				sum := l.Bias[o]
				for c := range C {
					for a := range w.KH {
						r := i*w.SH + a - w.Pad[0]
						if r < 0 || r >= H {
							continue
						}
						for b := range w.KW {
							q := j*w.SW + b - w.Pad[2]
							if q < 0 || q >= W {
								continue
							}
							sum += l.Kernel[((o*C+c)*w.KH+a)*w.KW+b] * x[(c*H+r)*W+q]
						}
					}
				}
				y[(o*OH+i)*OW+j] = sum
			}
		}
	}
	return y
}

// pool sums each window (sumpool) or averages it (avgpool), per channel.
func pool(l *Layer, x []float64) []float64 {
	in, out, w := l.Ins(), l.Outs(), l.Window
	C, H, W := in[0], in[1], in[2]
	OH, OW := out[1], out[2]
	div := 1.0
	if l.Kind == AvgPool {
		div = float64(w.KH * w.KW)
	}
	y := make([]float64, C*OH*OW)
	for c := range C {
		for i := range OH {
			for j := range OW {
				sum := 0.0
				for a := range w.KH {
					for b := range w.KW {
						sum += x[(c*H+i*w.SH+a)*W+j*w.SW+b]
					}
				}
				y[(c*OH+i)*OW+j] = sum / div
			}
		}
	}
	return y
}
