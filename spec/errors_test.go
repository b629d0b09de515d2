package spec

import (
	"errors"
	"math"
	"strings"
	"testing"
	"testing/fstest"
)

// head is a valid spec up to its layer list, which starts on line 7.
const head = `lanthorn: 1
model: gearbox
input:
  size: 2
  range: [-4, 4]
layers:
`

func TestParseErrors(t *testing.T) {
	w := func(data []float64, shape ...int) fstest.MapFS {
		return fstest.MapFS{"w.npy": npyBytes(t, data, shape...)}
	}
	raw := func(s string) fstest.MapFS { return fstest.MapFS{"w.npy": {Data: []byte(s)}} }
	for _, tc := range []struct {
		name  string
		src   string
		files fstest.MapFS
		want  []string // each must appear in the error text
	}{
		// Versions.
		{"missing version", "model: gearbox\n", nil, []string{
			`gearbox.yaml:1:1: missing required key "lanthorn": a spec starts with "lanthorn: 1", the schema version`}},
		{"wrong version", "lanthorn: 2\nmodel: gearbox\nbogus: 1\n", nil, []string{
			"gearbox.yaml:1:11: unsupported schema version 2; this lanthorn reads schema version 1"}},
		{"version not first", "model: gearbox\nlanthorn: 1\n", nil, []string{
			`gearbox.yaml:2:1: "lanthorn" must be the first key of the spec`}},
		{"version as string", "lanthorn: \"1\"\n", nil, []string{
			`gearbox.yaml:1:11: lanthorn: found string "1", expected the schema version, 1`}},
		{"version as float", "lanthorn: 1.0\n", nil, []string{
			`gearbox.yaml:1:11: lanthorn: found number 1.0, expected the schema version, 1`}},

		// Documents.
		{"empty file", "", nil, []string{`gearbox.yaml:1: spec is empty; it must start with "lanthorn: 1"`}},
		{"only a comment", "# nothing yet\n", nil, []string{`gearbox.yaml:1: spec is empty`}},
		{"top-level list", "- lanthorn: 1\n", nil, []string{
			`gearbox.yaml:1:1: found a list of 1 item, expected a mapping of spec keys starting with "lanthorn: 1"`}},
		{"two documents", head + "  - kind: activation\n    function: square\n---\nlanthorn: 1\n", nil, []string{
			`gearbox.yaml:9:1: a spec is a single YAML document; found a second one`}},
		{"yaml syntax error", "lanthorn: 1\nmodel: gearbox\ninput:\n  size: 2\n  range [-4, 4]\nlayers: []\n", nil, []string{
			"gearbox.yaml:5: YAML syntax error: could not find expected ':'"}},
		{"yaml tab indentation", "lanthorn: 1\ninput:\n\tsize: 2\n", nil, []string{
			"gearbox.yaml:3: YAML syntax error: found character that cannot start any token"}},
		{"unknown anchor", "lanthorn: 1\nmodel: *m\n", nil, []string{
			"gearbox.yaml:2:8: YAML syntax error: unknown anchor 'm' referenced"}},

		// Top level.
		{"unknown top-level key", "lanthorn: 1\nmodel: gearbox\ninput: {size: 2, range: [0, 1]}\nlayer: []\n", nil, []string{
			`gearbox.yaml:4:1: unknown key "layer" at top level; expected one of: lanthorn, model, description, input, output, precision, tolerance, insecure, params, layers`,
			`gearbox.yaml:1:1: missing required key "layers"`}},
		{"duplicate top-level key", "lanthorn: 1\nmodel: gearbox\nmodel: again\n", nil, []string{
			`gearbox.yaml:3:1: duplicate key "model" at top level (first at gearbox.yaml:2:1)`}},
		{"missing model and input", "lanthorn: 1\nlayers: []\n", nil, []string{
			`gearbox.yaml:1:1: missing required key "model"`,
			`gearbox.yaml:1:1: missing required key "input"`,
			`gearbox.yaml:2:9: layers: the list is empty; a model needs at least one layer`}},
		{"model not an identifier", "lanthorn: 1\nmodel: gear-box\n", nil, []string{
			`gearbox.yaml:2:8: model: found string "gear-box", expected a lower-case identifier ([a-z][a-z0-9_]*)`}},
		{"model a keyword", "lanthorn: 1\nmodel: func\n", nil, []string{
			`gearbox.yaml:2:8: model: "func" is a Go keyword; choose another name`}},
		{"model a number", "lanthorn: 1\nmodel: 7\n", nil, []string{
			`gearbox.yaml:2:8: model: found integer 7, expected a lower-case identifier`}},
		{"description a mapping", "lanthorn: 1\ndescription: {a: b}\n", nil, []string{
			`gearbox.yaml:2:14: description: found a mapping, expected text`}},
		{"precision out of range", "lanthorn: 1\nprecision: 3\n", nil, []string{
			`gearbox.yaml:2:12: precision: found integer 3, expected an integer from 4 to 50 (bits)`}},
		{"precision float", "lanthorn: 1\nprecision: 20.5\n", nil, []string{
			`gearbox.yaml:2:12: precision: found number 20.5, expected an integer from 4 to 50 (bits)`}},
		{"insecure not bool", "lanthorn: 1\ninsecure: yes\n", nil, []string{
			`gearbox.yaml:2:11: insecure: found string "yes", expected true or false`}},
		{"non-scalar key", "lanthorn: 1\n? [a]\n: 1\n", nil, []string{
			`gearbox.yaml:2:3: found a list of 1 item as a key at top level; keys are names`}},
		{"merge key", "lanthorn: 1\nbase: &b {size: 2}\ninput:\n  <<: *b\n", nil, []string{
			`gearbox.yaml:4:3: YAML merge keys (<<) are not supported in input`}},

		// Input and output.
		{"input wrong type", "lanthorn: 1\ninput: 10\n", nil, []string{
			`gearbox.yaml:2:8: input: found integer 10, expected a mapping`}},
		{"input size wrong type", "lanthorn: 1\ninput:\n  size: ten\n  range: [0, 1]\n", nil, []string{
			`gearbox.yaml:3:9: input.size: found string "ten", expected an integer >= 1`}},
		{"input size missing value", "lanthorn: 1\ninput:\n  size:\n  range: [0, 1]\n", nil, []string{
			`gearbox.yaml:3:8: input.size: found no value, expected an integer >= 1`}},
		{"input size over the limit", "lanthorn: 1\ninput:\n  size: 16777217\n  range: [0, 1]\n", nil, []string{
			`gearbox.yaml:3:9: input.size: found integer 16777217, expected at most 16777216 (the size limit)`}},
		{"input keys missing", "lanthorn: 1\ninput:\n  nmae: x\n", nil, []string{
			`gearbox.yaml:3:3: unknown key "nmae" in input; expected one of: name, size, shape, range`,
			`gearbox.yaml:3:3: input: missing required key "size"`,
			`gearbox.yaml:3:3: input: missing required key "range"`}},
		{"input name bad", "lanthorn: 1\ninput:\n  name: 2x\n", nil, []string{
			`gearbox.yaml:3:9: input.name: found string "2x", expected an identifier ([A-Za-z_][A-Za-z0-9_]*)`}},
		{"range empty", "lanthorn: 1\ninput:\n  range: [1, 1]\n", nil, []string{
			`gearbox.yaml:3:10: input.range [1, 1] is empty; expected [min, max] with min < max`}},
		{"range not a pair", "lanthorn: 1\ninput:\n  range: [1, 2, 3]\n", nil, []string{
			`gearbox.yaml:3:10: input.range: found a list of 3 items, expected a list of two numbers [min, max]`}},
		{"range infinite", "lanthorn: 1\ninput:\n  range: [-.inf, 2]\n", nil, []string{
			`gearbox.yaml:3:11: input.range[0]: found number -.inf, expected a finite number`}},
		{"range element string", "lanthorn: 1\ninput:\n  range: [a, 2]\n", nil, []string{
			`gearbox.yaml:3:11: input.range[0]: found string "a", expected a number`}},
		{"output unknown key", "lanthorn: 1\noutput:\n  size: 3\n  name: risk-score\n", nil, []string{
			`gearbox.yaml:3:3: unknown key "size" in output; expected one of: name, mask`,
			`gearbox.yaml:4:9: output.name: found string "risk-score", expected an identifier`}},

		// Params.
		{"params out of range", "lanthorn: 1\nparams:\n  logN: 9\n  logQ: [50, 19]\n  logP: []\n  logScale: big\n  logn: 14\n", nil, []string{
			`gearbox.yaml:3:9: params.logN: found integer 9, expected an integer from 10 to 17`,
			`gearbox.yaml:4:14: params.logQ[1]: found integer 19, expected an integer from 20 to 61`,
			`gearbox.yaml:5:9: params.logP: found an empty list, expected a non-empty list of prime sizes in bits, each from 20 to 61`,
			`gearbox.yaml:6:13: params.logScale: found string "big", expected an integer from 16 to 60`,
			`gearbox.yaml:7:3: unknown key "logn" in params; expected one of: logN, logQ, logP, logScale`}},
		{"params not a mapping", "lanthorn: 1\nparams: [14]\n", nil, []string{
			`gearbox.yaml:2:9: params: found a list of 1 item, expected a mapping`}},

		// Layers in general.
		{"zero layers", head[:len(head)-1] + " []\n", nil, []string{
			`gearbox.yaml:6:9: layers: the list is empty; a model needs at least one layer`}},
		{"layers not a list", head[:len(head)-1] + " dense\n", nil, []string{
			`gearbox.yaml:6:9: layers: found string "dense", expected a list of layers`}},
		{"layer not a mapping", head + "  - dense\n", nil, []string{
			`gearbox.yaml:7:5: layers[0]: found string "dense", expected a layer (a mapping with a kind)`}},
		{"missing kind", head + "  - out: 2\n", nil, []string{
			`gearbox.yaml:7:5: layers[0]: missing required key "kind" (dense, activation, conv2d, avgpool, sumpool, flatten, batchnorm or scale)`}},
		{"unknown kind", head + "  - kind: maxpool\n", nil, []string{
			`gearbox.yaml:7:11: layers[0].kind: found string "maxpool", expected dense, activation, conv2d, avgpool, sumpool, flatten, batchnorm or scale`}},
		{"duplicate layer names", head + "  - kind: activation\n    function: square\n  - kind: activation\n    name: act1\n    function: square\n", nil, []string{
			`gearbox.yaml:10:11: duplicate layer name "act1" (first used at gearbox.yaml:7:5)`}},
		{"duplicate explicit names", head + "  - kind: activation\n    name: a\n    function: square\n  - kind: dense\n    name: a\n    out: 1\n    weights: [[1, 1]]\n", nil, []string{
			`gearbox.yaml:11:11: duplicate layer name "a" (first used at gearbox.yaml:8:11)`}},
		{"duplicate key in layer", head + "  - kind: dense\n    out: 1\n    out: 2\n    weights: [[1, 2]]\n", nil, []string{
			`gearbox.yaml:9:5: duplicate key "out" in layers[0] (first at gearbox.yaml:8:5)`}},
		{"layer name bad", head + "  - kind: activation\n    name: act 1\n    function: square\n", nil, []string{
			`gearbox.yaml:8:11: layers[0].name: found string "act 1", expected an identifier`}},

		// Dense layers.
		{"unknown key in dense", head + "  - kind: dense\n    out: 1\n    wieghts: [[1, 2]]\n", nil, []string{
			`gearbox.yaml:9:5: unknown key "wieghts" in dense layer; expected one of: name, out, weights, bias`,
			`gearbox.yaml:7:5: dense1: missing required key "weights"`}},
		{"out wrong type", head + "  - kind: dense\n    out: [3]\n    weights: [[1, 2]]\n", nil, []string{
			`gearbox.yaml:8:10: dense1: out: found a list of 1 item, expected an integer >= 1`}},
		{"out missing", head + "  - kind: dense\n    weights: [[1, 2]]\n", nil, []string{
			`gearbox.yaml:7:5: dense1: missing required key "out" (the layer's output size)`}},
		{"missing weight file", head + "  - kind: dense\n    out: 1\n    weights: weights/d1.npy\n", nil, []string{
			`gearbox.yaml:9:14: dense1: weights: open weights/d1.npy: file does not exist`}},
		{"weight path outside", head + "  - kind: dense\n    out: 1\n    weights: ../w.npy\n", nil, []string{
			`gearbox.yaml:9:14: dense1: weights: "../w.npy" is outside the spec's directory`}},
		{"weight path absolute", head + "  - kind: dense\n    out: 1\n    weights: /etc/w.npy\n", nil, []string{
			`gearbox.yaml:9:14: dense1: weights: "/etc/w.npy" is not a relative slash-separated path`}},
		{"weight path a directory", head + "  - kind: dense\n    out: 1\n    weights: sub\n", fstest.MapFS{"sub/w.npy": {}}, []string{
			`gearbox.yaml:9:14: dense1: weights: sub is a directory, expected a .npy file`}},
		{"weights wrong type", head + "  - kind: dense\n    out: 1\n    weights: 3\n", nil, []string{
			`gearbox.yaml:9:14: dense1: weights: found integer 3, expected a path to a .npy file or a list of 1 rows`}},
		{"npy shape mismatch", head + "  - kind: dense\n    out: 1\n    weights: w.npy\n", w(make([]float64, 6), 3, 2), []string{
			`gearbox.yaml:9:14: dense1: weights shape [3 2], want [1 2] (out × in)`}},
		{"npy weights one-dimensional", head + "  - kind: dense\n    out: 2\n    weights: w.npy\n", w(make([]float64, 2), 2), []string{
			`gearbox.yaml:9:14: dense1: weights shape [2], want [2 2] (out × in)`}},
		{"npy shape mismatch later layer", head + "  - kind: dense\n    out: 16\n    weights: [" + strings.Repeat("[1, 2], ", 15) + "[1, 2]]\n  - kind: dense\n    out: 8\n    weights: w.npy\n",
			w(make([]float64, 16*32), 16, 32), []string{
				`gearbox.yaml:12:14: dense2: weights shape [16 32], want [8 16] (out × in)`}},
		{"inline shape mismatch", head + "  - kind: dense\n    out: 1\n    weights: [[1, 2, 3]]\n", nil, []string{
			`gearbox.yaml:9:14: dense1: weights shape [1 3], want [1 2] (out × in)`}},
		{"inline rows unequal", head + "  - kind: dense\n    out: 2\n    weights:\n      - [1, 2]\n      - [3]\n", nil, []string{
			`gearbox.yaml:11:9: dense1: weights[1] has 1 numbers but dense1: weights[0] has 2; rows must all have the same length`}},
		{"inline row not a list", head + "  - kind: dense\n    out: 1\n    weights: [1, 2]\n", nil, []string{
			`gearbox.yaml:9:15: dense1: weights[0]: found integer 1, expected a row, a list of 2 numbers`}},
		{"inline NaN", head + "  - kind: dense\n    out: 1\n    weights: [[1, .nan]]\n", nil, []string{
			`gearbox.yaml:9:19: dense1: weights[0][1]: found number .nan, expected a finite number`}},
		{"inline string element", head + "  - kind: dense\n    out: 1\n    weights: [[1, x]]\n", nil, []string{
			`gearbox.yaml:9:19: dense1: weights[0][1]: found string "x", expected a number`}},
		{"many bad elements", head[:len(head)-len("  size: 2\n  range: [-4, 4]\nlayers:\n")] + "  size: 8\n  range: [-4, 4]\nlayers:\n  - kind: dense\n    out: 1\n    weights: [[a, b, c, d, e, f, g, h]]\n", nil, []string{
			`gearbox.yaml:9:16: dense1: weights[0][0]: found string "a", expected a number`,
			`gearbox.yaml:9:28: dense1: weights[0][4]: found string "e", expected a number`,
			`gearbox.yaml:9:15: dense1: weights: 3 more bad elements in this list`}},
		{"npy NaN", head + "  - kind: dense\n    out: 2\n    weights: w.npy\n", w([]float64{1, 2, 3, math.NaN()}, 2, 2), []string{
			`gearbox.yaml:9:14: dense1: weights: w.npy: element [1][1] is NaN; weights must be finite`}},
		{"npy Inf count", head + "  - kind: dense\n    out: 2\n    weights: w.npy\n", w([]float64{1, math.Inf(1), math.Inf(-1), math.NaN()}, 2, 2), []string{
			`gearbox.yaml:9:14: dense1: weights: w.npy: element [0][1] is +Inf (and 2 more non-finite elements); weights must be finite`}},
		{"not a npy file", head + "  - kind: dense\n    out: 1\n    weights: w.npy\n", raw("1,2\n"), []string{
			`gearbox.yaml:9:14: dense1: weights: w.npy: not a .npy file: only 4 bytes long`}},
		{"npy unsupported dtype", head + "  - kind: dense\n    out: 1\n    weights: w.npy\n", raw(npyFile("{'descr': '<c8', 'fortran_order': False, 'shape': (1, 2), }", "")), []string{
			`gearbox.yaml:9:14: dense1: weights: w.npy: unsupported .npy dtype '<c8'`}},
		{"npy big-endian", head + "  - kind: dense\n    out: 1\n    weights: w.npy\n", raw(npyFile("{'descr': '>f4', 'fortran_order': False, 'shape': (1, 2), }", "\x3f\x80\x00\x00\x3f\x80\x00\x00")), []string{
			`gearbox.yaml:9:14: dense1: weights: w.npy: big-endian .npy dtype '>f4' is not supported`}},
		{"npy too many elements", head + "  - kind: dense\n    out: 1\n    weights: w.npy\n", raw(npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (4096, 8192), }", "")), []string{
			`gearbox.yaml:9:14: dense1: weights: w.npy: .npy shape (4096, 8192) has more than 16777216 elements`}},
		{"npy data short", head + "  - kind: dense\n    out: 1\n    weights: w.npy\n", raw(npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (1, 2), }", "\x00\x00")), []string{
			`gearbox.yaml:9:14: dense1: weights: w.npy: .npy data is 2 bytes, shorter than the 16 bytes`}},
		{"bias npy shape", head + "  - kind: dense\n    out: 2\n    weights: [[1, 2], [3, 4]]\n    bias: w.npy\n", w([]float64{1, 2}, 1, 2), []string{
			`gearbox.yaml:10:11: dense1: bias shape [1 2], want [2] (out)`}},
		{"bias npy Inf", head + "  - kind: dense\n    out: 2\n    weights: [[1, 2], [3, 4]]\n    bias: w.npy\n", w([]float64{1, math.Inf(-1)}, 2), []string{
			`gearbox.yaml:10:11: dense1: bias: w.npy: element [1] is -Inf; weights must be finite`}},
		{"bias inline length", head + "  - kind: dense\n    out: 2\n    weights: [[1, 2], [3, 4]]\n    bias: [1, 2, 3]\n", nil, []string{
			`gearbox.yaml:10:11: dense1: bias has 3 numbers, want 2 (out)`}},
		{"bias wrong type", head + "  - kind: dense\n    out: 2\n    weights: [[1, 2], [3, 4]]\n    bias: {a: 1}\n", nil, []string{
			`gearbox.yaml:10:11: dense1: bias: found a mapping, expected a path to a .npy file or a list of 2 numbers`}},

		// Activation layers.
		{"unknown key in activation", head + "  - kind: activation\n    function: square\n    out: 2\n", nil, []string{
			`gearbox.yaml:9:5: unknown key "out" in activation layer; expected one of: name, function, interval, degree, tolerance, coefficients`}},
		{"function missing", head + "  - kind: activation\n", nil, []string{
			`gearbox.yaml:7:5: act1: missing required key "function" (square, poly, relu, sigmoid or tanh)`}},
		{"function unknown", head + "  - kind: activation\n    function: gelu\n", nil, []string{
			`gearbox.yaml:8:15: act1: function: found string "gelu", expected square, poly, relu, sigmoid or tanh`}},
		{"tanh without interval", head + "  - kind: activation\n    function: tanh\n", nil, []string{
			`gearbox.yaml:7:5: act1: missing required key "interval": tanh is approximated by a polynomial`}},
		{"interval empty", head + "  - kind: activation\n    function: relu\n    interval: [4, -4]\n", nil, []string{
			`gearbox.yaml:9:15: act1: interval [4, -4] is empty; expected [a, b] with a < b`}},
		{"interval NaN", head + "  - kind: activation\n    function: square\n    interval: [.nan, 1]\n", nil, []string{
			`gearbox.yaml:9:16: act1: interval[0]: found number .nan, expected a finite number`}},
		{"degree out of range", head + "  - kind: activation\n    function: sigmoid\n    interval: [-8, 8]\n    degree: 64\n", nil, []string{
			`gearbox.yaml:10:13: act1: degree: found integer 64, expected an integer from 1 to 63`}},
		{"degree zero", head + "  - kind: activation\n    function: sigmoid\n    interval: [-8, 8]\n    degree: 0\n", nil, []string{
			`gearbox.yaml:10:13: act1: degree: found integer 0, expected an integer from 1 to 63`}},
		{"tolerance and degree", head + "  - kind: activation\n    function: tanh\n    interval: [-2, 2]\n    degree: 7\n    tolerance: 0.01\n", nil, []string{
			`gearbox.yaml:11:5: act1: both degree and tolerance given; give degree to fix the interpolant, or tolerance to let the planner choose the degree`}},
		{"tolerance zero", head + "  - kind: activation\n    function: relu\n    interval: [-2, 2]\n    tolerance: 0\n", nil, []string{
			`gearbox.yaml:10:16: act1: tolerance: found 0, expected a number from 1e-12 to 1000 (the largest absolute error allowed, e.g. 0.01)`}},
		{"tolerance negative", head + "  - kind: activation\n    function: relu\n    interval: [-2, 2]\n    tolerance: -0.1\n", nil, []string{
			`gearbox.yaml:10:16: act1: tolerance: found -0.1, expected a number from 1e-12 to 1000`}},
		{"tolerance not a number", head + "  - kind: activation\n    function: sigmoid\n    interval: [-2, 2]\n    tolerance: small\n", nil, []string{
			`gearbox.yaml:10:16: act1: tolerance: found string "small", expected a number (the largest absolute error allowed, e.g. 0.01)`}},
		{"tolerance on square", head + "  - kind: activation\n    function: square\n    tolerance: 0.1\n", nil, []string{
			`gearbox.yaml:9:5: act1: tolerance is only for relu, sigmoid and tanh; square is evaluated exactly`}},
		{"tolerance on poly", head + "  - kind: activation\n    function: poly\n    coefficients: [0, 1]\n    tolerance: 0.1\n", nil, []string{
			`gearbox.yaml:10:5: act1: tolerance is only for relu, sigmoid and tanh; poly is evaluated exactly`}},
		{"model tolerance infinite", "lanthorn: 1\nmodel: gearbox\ntolerance: .inf\ninput:\n  size: 2\n  range: [-4, 4]\nlayers:\n  - kind: activation\n    function: tanh\n    interval: [-1, 1]\n", nil, []string{
			`gearbox.yaml:3:12: tolerance: found`}},
		{"degree on square", head + "  - kind: activation\n    function: square\n    degree: 2\n", nil, []string{
			`gearbox.yaml:9:5: act1: degree is only for relu, sigmoid and tanh; square is exactly degree 2`}},
		{"degree on poly", head + "  - kind: activation\n    function: poly\n    coefficients: [0, 1]\n    degree: 1\n", nil, []string{
			`gearbox.yaml:10:5: act1: degree is only for relu, sigmoid and tanh; poly's degree follows from its coefficients`}},
		{"poly without coefficients", head + "  - kind: activation\n    function: poly\n", nil, []string{
			`gearbox.yaml:7:5: act1: missing required key "coefficients": poly needs [c0, c1, ...]`}},
		{"poly one coefficient", head + "  - kind: activation\n    function: poly\n    coefficients: [1]\n", nil, []string{
			`gearbox.yaml:9:19: act1: coefficients: found a list of 1 item, expected a list of at least two numbers [c0, c1, ...]`}},
		{"poly last coefficient zero", head + "  - kind: activation\n    function: poly\n    coefficients: [1, 2, 0]\n", nil, []string{
			`gearbox.yaml:9:26: act1: coefficients: the last coefficient is 0; it must be nonzero`}},
		{"poly coefficient infinite", head + "  - kind: activation\n    function: poly\n    coefficients: [1, .inf]\n", nil, []string{
			`gearbox.yaml:9:23: act1: coefficients[1]: found number .inf, expected a finite number`}},
		{"coefficients on tanh", head + "  - kind: activation\n    function: tanh\n    interval: [-1, 1]\n    coefficients: [0, 1]\n", nil, []string{
			`gearbox.yaml:10:5: act1: coefficients are only for function: poly (tanh has none to give)`}},

		// Aliases that expand into far more than the document holds.
		{"alias bomb", "lanthorn: 1\nmodel: gearbox\ninput: {size: 1000, range: [0, 1]}\n" +
			"r: &r [1" + strings.Repeat(", 1", 999) + "]\n" +
			"w: &w [*r" + strings.Repeat(", *r", 999) + "]\n" +
			"layers: [{kind: dense, out: 1000, weights: *w}" + strings.Repeat(", {kind: dense, out: 1000, weights: *w}", 999) + "]\n", nil, []string{
			"the spec's YAML aliases expand into too much data; stopped reading here"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			g, _, err := parseSafely(t, "gearbox.yaml", tc.src, tc.files)
			if err == nil {
				t.Fatalf("no error; got graph %+v", g)
			}
			if g != nil {
				t.Errorf("a graph came with the error")
			}
			var list ErrorList
			if !errors.As(err, &list) || len(list) == 0 {
				t.Fatalf("error %T %v is not a non-empty ErrorList", err, err)
			}
			text := err.Error()
			for _, want := range tc.want {
				if !strings.Contains(text, want) {
					t.Errorf("error text\n%s\ndoes not contain\n%s", text, want)
				}
			}
		})
	}
}
