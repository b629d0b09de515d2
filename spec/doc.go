// Package spec reads lanthorn model specs: a YAML file that describes a model
// and names its trained weights. It checks the spec against the schema and
// the weights against the layer shapes, and produces an ir.Graph.
//
// # Schema version 1
//
// A spec is one YAML document, a mapping whose first key is the schema
// version. An example, with every key:
//
//	lanthorn: 1                 # schema version: required, the first key
//	model: gearbox              # required: [a-z][a-z0-9_]*, not a Go keyword
//	description: vibration risk from ten sensor readings   # optional, ignored
//	input:
//	  name: features            # optional, default "input"
//	  size: 10                  # required, >= 1 (or shape: [C, H, W] for an image)
//	  range: [-4, 4]            # required: every input value lies in [min, max]
//	output:
//	  name: risk                # optional, default "output"
//	  mask: true                # optional: zero the result's slots that are not outputs (see below), default true
//	precision: 20               # optional: bits of absolute precision wanted on outputs, 4..50, default 20
//	tolerance: 0.05             # optional: default tolerance of every relu, sigmoid and tanh without degree or tolerance
//	insecure: false             # optional: allow parameters past the 128-bit security bound, default false
//	params:                     # optional: pin CKKS parameters; each key optional
//	  logN: 14                  # ring degree log2, 10..17
//	  logQ: [50, 35, 35]        # bits of each ciphertext prime, q0 first, each 20..61
//	  logP: [50]                # bits of each key-switching prime, each 20..61 (unpinned: as many as make key switches cheapest)
//	  logScale: 35              # log2 of the default scale, 16..60
//	layers:                     # required, at least one, in evaluation order
//	  - kind: dense
//	    name: dense1            # optional, see below
//	    out: 16                 # required, >= 1
//	    weights: weights/dense1_w.npy   # required: shape [out, in]
//	    bias: weights/dense1_b.npy      # optional (zeros): shape [out]
//	  - kind: activation
//	    function: tanh          # square | poly | relu | sigmoid | tanh
//	    interval: [-4, 4]       # the inputs of the activation lie in [a, b]
//	    degree: 7               # optional: degree of the interpolant, 1..63 (or tolerance, not both)
//	    # tolerance: 0.01         # optional: largest absolute error allowed; the planner chooses the degree
//	  - kind: dense
//	    out: 2
//	    weights:                # inline: out rows of in numbers
//	      - [0.5, -0.25, 0.125, 1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 2]
//	      - [0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, -1]
//	    bias: [0.1, -0.1]       # inline: out numbers
//	  - kind: activation
//	    function: poly
//	    coefficients: [0, 0.5, 0.125]   # c0 + c1 x + c2 x^2
//
// Names (model, input and output names, layer names) are identifiers:
// letters, digits and underscores, not starting with a digit; the model name
// is lower case. Numbers are YAML integers or floats and must be finite.
//
// # Output slots
//
// The result ciphertext holds the outputs and, in its other slots, only
// zeros or copies of outputs (copies that the block method of a layer with
// few outputs leaves reveal nothing beyond the outputs). Where the last
// layer would leave more of the model there — partial sums of a linear
// layer, or p(0) of a final activation in padding slots — the planner
// zeroes those slots: by subtracting p(0) where an activation's input is
// zero, or by folding a 0/1 mask into the last layer's plaintexts, at no
// level; otherwise by a plaintext product with the mask, which costs one
// level. output.mask: false turns this off (the plan then says which
// slots are left); any other value than true or false is an error.
//
// # Layers
//
// A dense layer computes W x + b. Its input size, in, is the output size of
// the layer before it (input.size for the first layer). weights is either
// the path of a .npy file of shape [out, in] or an inline list of out rows
// of in numbers; bias is a .npy file of shape [out] or an inline list of out
// numbers, and zeros when absent. Paths are relative to the spec file's
// directory, use forward slashes, and may not leave that directory.
//
// An activation layer applies a function to every element; its size is that
// of the layer before it. The functions:
//
//   - square: x², evaluated exactly. interval is optional (a declared
//     input range); degree and coefficients are not allowed.
//   - poly: the polynomial c0 + c1 x + c2 x² + ... with the given
//     coefficients (at least two, the last nonzero), evaluated exactly.
//     interval is optional; degree is not allowed (the coefficients give it).
//   - relu, sigmoid, tanh: replaced by a Chebyshev interpolant of the given
//     degree on interval, which is required and must hold every input the
//     activation sees: outside it the approximation is meaningless. The
//     default degree is 15 for relu and 7 for sigmoid and tanh.
//     Instead of degree, tolerance (a number from 1e-12 to 1000) bounds the
//     absolute error |f(x) − p(x)| over the interval, and the planner
//     chooses the degree: it offers, for each number of levels, the
//     smallest degree whose error meets the tolerance, and picks among
//     them jointly with its other choices (fewer levels cost less and may
//     fit a smaller ring). The error is measured on 4097 evenly spaced
//     points of the interval and 1025 Chebyshev points (cos(πk/1024),
//     mapped onto it), so it is the error at those points, not a proven
//     bound between them. A top-level tolerance is the default for every
//     relu, sigmoid and tanh that gives neither degree nor tolerance;
//     degree and tolerance on one layer are an error, and so is a
//     tolerance that no degree up to 63 meets (the error names the layer).
//
// # Images and tensor layers
//
// An image input has shape: [C, H, W] (channels, height, width) instead of
// size. Its values are packed channel-major: value (c, y, x) is element
// (c·H + y)·W + x of the vector the client encrypts, and every tensor layer
// keeps that order. These layers read a [C, H, W] tensor:
//
//	layers:
//	  - kind: conv2d            # cross-correlation, as deep-learning frameworks compute it
//	    in: 1                   # optional: input channels, checked against the tensor
//	    out: 5                  # required: output channels
//	    kernel: [5, 5]          # required: [height, width], or one number for both
//	    stride: 2               # optional, default 1: [height, width] or one number
//	    padding: 1              # optional, default 0: zeros on every side, or {top: 1, bottom: 2, left: 1, right: 2}
//	    weights: conv1_w.npy    # required: shape [out, in, kernel height, kernel width], .npy or nested lists
//	    bias: conv1_b.npy       # optional (zeros): shape [out]
//	  - kind: avgpool           # or sumpool: the mean (sum) of each window, per channel
//	    kernel: 2               # required: [height, width] or one number
//	    stride: 2               # optional, default the kernel; pools take no padding
//	  - kind: flatten           # [C, H, W] → [C·H·W]; moves no data
//
// A conv2d output has floor((H + top + bottom − kh)/sh) + 1 rows and
// likewise columns; a kernel that does not fit is an error naming the layer.
// A dense layer must read a vector, so a flatten layer comes between the
// last tensor layer and the first dense one. These take a vector or an
// image:
//
//	layers:
//	  - kind: batchnorm         # γ·(x − mean)/sqrt(variance + epsilon) + β, per channel
//	    mean: [0.1, 0.2]        # required: one per channel (per value of a vector), .npy or list
//	    variance: [1.0, 0.5]    # required, each >= 0
//	    gamma: [1.0, 1.0]       # optional, default ones
//	    beta: [0.0, 0.0]        # optional, default zeros
//	    epsilon: 0.00001        # optional, default 1e-5
//	  - kind: scale             # every value times a constant
//	    factor: 0.5             # required, nonzero
//
// A batch norm is folded into the convolution or dense layer before it and
// is never evaluated on ciphertexts; convolutions, pools and scalings become
// sparse linear maps, and consecutive linear layers are merged into one.
//
// A layer without a name gets its kind word and its number among the layers
// of that kind, counting named ones: dense1, dense2, ... for dense layers,
// act1, ... for activations, conv1, ... for convolutions, pool1, ... for
// average and sum pools together, flatten1, norm1 and scale1 for the rest.
// Layer names must be unique.
//
// # Weight files
//
// .npy files are NumPy's format, versions 1.0, 2.0 and 3.0, as written by
// numpy.save: little-endian float64, float32, int64 or int32 ('<f8', '<f4',
// '<i8', '<i4'; also smaller integers and bool), C or Fortran order. An
// array may have at most MaxElements elements, and so may an inline list; a
// spec file may be at most MaxSpecBytes long.
//
// # Errors
//
// Parse and Load report every problem they find, not only the first, as an
// ErrorList sorted by position. Each entry names the spec file, line and
// column, says what was found and what is expected, and for a weight file
// points at the key that names the file:
//
//	gearbox.yaml:14:7: unknown key "wieghts" in dense layer; expected one of: name, out, weights, bias
//	gearbox.yaml:5:9: input.size: found string "ten", expected an integer >= 1
//	gearbox.yaml:22:14: dense2: weights shape [16 32], want [8 16] (out × in)
//
// Unknown and duplicate keys are errors, and so is any schema version other
// than 1. YAML anchors and aliases may be used; merge keys (<<) may not.
package spec
