package runtime

import (
	"fmt"
	"math"
)

// Conv2DShape is the geometry of a convolution: its input [C, H, W], its
// output channels, kernel [height, width], stride and zero padding (top,
// bottom, left, right).
type Conv2DShape struct {
	In     [3]int
	Out    int
	Kernel [2]int
	Stride [2]int
	Pad    [4]int
}

// PoolShape is the geometry of a pool: its input [C, H, W], window
// [height, width] and stride. Pools are not padded.
type PoolShape struct {
	In     [3]int
	Kernel [2]int
	Stride [2]int
}

// outHW is the output height and width of a window over an input, or an
// error when it does not fit.
func outHW(h, w, kh, kw, sh, sw int, pad [4]int) (int, int, error) {
	ph, pw := h+pad[0]+pad[1], w+pad[2]+pad[3]
	if kh < 1 || kw < 1 || sh < 1 || sw < 1 || ph < kh || pw < kw {
		return 0, 0, fmt.Errorf("window %d×%d stride %d×%d does not fit a %d×%d input", kh, kw, sh, sw, ph, pw)
	}
	return (ph-kh)/sh + 1, (pw-kw)/sw + 1, nil
}

// Conv2D returns the convolution of x, a [C, H, W] tensor packed
// channel-major, with the kernel (Out×C×KH×KW, row-major) and one bias per
// output channel from the blob: y[o][i][j] = b[o] + Σ K[o][c][a][b] ·
// x[c][i·SH + a − top][j·SW + b − left], zero outside the input.
func (r *Reference) Conv2D(x []float64, s Conv2DShape, kernel, bias string) []float64 {
	if r.err != nil {
		return nil
	}
	C, H, W := s.In[0], s.In[1], s.In[2]
	KH, KW := s.Kernel[0], s.Kernel[1]
	OH, OW, err := outHW(H, W, KH, KW, s.Stride[0], s.Stride[1], s.Pad)
	if err != nil {
		return r.fail(fmt.Errorf("conv2d %s: %w", kernel, err))
	}
	if len(x) != C*H*W {
		return r.fail(fmt.Errorf("conv2d %s: input of %d, want %d×%d×%d", kernel, len(x), C, H, W))
	}
	k, err := r.w.Vector(kernel)
	if err != nil {
		return r.fail(err)
	}
	if len(k) != s.Out*C*KH*KW {
		return r.fail(fmt.Errorf("%s: %d values, want %d×%d×%d×%d", kernel, len(k), s.Out, C, KH, KW))
	}
	b, err := r.w.Vector(bias)
	if err != nil {
		return r.fail(err)
	}
	if len(b) != s.Out {
		return r.fail(fmt.Errorf("%s: %d values, want %d", bias, len(b), s.Out))
	}
	y := make([]float64, s.Out*OH*OW)
	for o := 0; o < s.Out; o++ {
		for i := 0; i < OH; i++ {
			for j := 0; j < OW; j++ {
				sum := b[o]
				for c := 0; c < C; c++ {
					for a := 0; a < KH; a++ {
						row := i*s.Stride[0] + a - s.Pad[0]
						if row < 0 || row >= H {
							continue
						}
						for q := 0; q < KW; q++ {
							col := j*s.Stride[1] + q - s.Pad[2]
							if col < 0 || col >= W {
								continue
							}
							sum += k[((o*C+c)*KH+a)*KW+q] * x[(c*H+row)*W+col]
						}
					}
				}
				y[(o*OH+i)*OW+j] = sum
			}
		}
	}
	return y
}

// AvgPool returns the mean of each window, per channel.
func (r *Reference) AvgPool(x []float64, s PoolShape) []float64 {
	return r.pool(x, s, 1/float64(s.Kernel[0]*s.Kernel[1]), "avgpool")
}

// SumPool returns the sum of each window, per channel.
func (r *Reference) SumPool(x []float64, s PoolShape) []float64 {
	return r.pool(x, s, 1, "sumpool")
}

func (r *Reference) pool(x []float64, s PoolShape, factor float64, what string) []float64 {
	if r.err != nil {
		return nil
	}
	C, H, W := s.In[0], s.In[1], s.In[2]
	OH, OW, err := outHW(H, W, s.Kernel[0], s.Kernel[1], s.Stride[0], s.Stride[1], [4]int{})
	if err != nil {
		return r.fail(fmt.Errorf("%s: %w", what, err))
	}
	if len(x) != C*H*W {
		return r.fail(fmt.Errorf("%s: input of %d, want %d×%d×%d", what, len(x), C, H, W))
	}
	y := make([]float64, C*OH*OW)
	for c := 0; c < C; c++ {
		for i := 0; i < OH; i++ {
			for j := 0; j < OW; j++ {
				var sum float64
				for a := 0; a < s.Kernel[0]; a++ {
					for q := 0; q < s.Kernel[1]; q++ {
						sum += x[(c*H+i*s.Stride[0]+a)*W+j*s.Stride[1]+q]
					}
				}
				y[(c*OH+i)*OW+j] = sum * factor
			}
		}
	}
	return y
}

// BatchNorm returns γ·(x − mean)/sqrt(variance + eps) + β with one set of
// parameters per channel; the values of a channel are contiguous (a vector
// has one channel per value).
func (r *Reference) BatchNorm(x []float64, channels int, gamma, beta, mean, variance string, eps float64) []float64 {
	if r.err != nil {
		return nil
	}
	if channels < 1 || len(x)%channels != 0 {
		return r.fail(fmt.Errorf("batchnorm %s: %d values do not split into %d channels", gamma, len(x), channels))
	}
	var params [4][]float64
	for i, name := range []string{gamma, beta, mean, variance} {
		v, err := r.w.Vector(name)
		if err != nil {
			return r.fail(err)
		}
		if len(v) != channels {
			return r.fail(fmt.Errorf("%s: %d values, want %d", name, len(v), channels))
		}
		params[i] = v
	}
	per := len(x) / channels
	y := make([]float64, len(x))
	for i, v := range x {
		c := i / per
		y[i] = params[0][c]*(v-params[2][c])/math.Sqrt(params[3][c]+eps) + params[1][c]
	}
	return y
}

// Scale multiplies every value by a constant.
func (r *Reference) Scale(x []float64, factor float64) []float64 {
	return r.Apply(x, func(v float64) float64 { return factor * v })
}
