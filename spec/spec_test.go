package spec

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"testing/fstest"

	"github.com/lanthorn/lanthorn/ir"
)

// parseSafely runs Parse and fails the test if it panics or reports an
// internal error (Parse turns a panic into one).
func parseSafely(t *testing.T, name, src string, fsys fstest.MapFS) (*ir.Graph, []string, error) {
	t.Helper()
	var (
		g     *ir.Graph
		files []string
		err   error
	)
	func() {
		defer func() {
			if r := recover(); r != nil {
				t.Fatalf("Parse panicked: %v", r)
			}
		}()
		g, files, err = ParseWithFiles(name, []byte(src), fsys)
	}()
	if err != nil && strings.Contains(err.Error(), "internal error") {
		t.Fatalf("Parse recovered from a panic: %v", err)
	}
	return g, files, err
}

// npyBytes writes a .npy file with WriteNPY.
func npyBytes(t testing.TB, data []float64, shape ...int) *fstest.MapFile {
	t.Helper()
	var b bytes.Buffer
	if err := WriteNPY(&b, data, shape); err != nil {
		t.Fatal(err)
	}
	return &fstest.MapFile{Data: b.Bytes()}
}

func pos(line, col int) ir.Pos { return ir.Pos{File: "gearbox.yaml", Line: line, Col: col} }

const inlineSpec = `lanthorn: 1
model: gearbox
description: vibration risk from three sensor readings
input:
  name: features
  size: 3
  range: [-4, 4]
output:
  name: risk
precision: 24
insecure: true
params:
  logN: 14
  logQ: [50, 35, 35]
  logP: [50]
  logScale: 35
layers:
  - kind: dense
    out: 2
    weights: [[1, 2, 3], [4, 5.5, -6e-1]]
    bias: [0.5, -0.5]
  - kind: activation
    function: tanh
    interval: [-4, 4]
  - kind: activation
    name: sq
    function: square
  - kind: dense
    name: head
    out: 1
    weights:
      - [0.25, -1]
  - kind: activation
    function: poly
    coefficients: [0, 0.5, 0.125]
    interval: [-2, 2]
  - kind: activation
    function: relu
    interval: [-1, 1]
    degree: 9
`

func TestParseInline(t *testing.T) {
	g, files, err := parseSafely(t, "specs/gearbox.yaml", inlineSpec, nil)
	if err != nil {
		t.Fatal(err)
	}
	want := &ir.Graph{
		Name:       "gearbox",
		SpecFile:   "gearbox.yaml",
		Input:      ir.Input{Name: "features", Size: 3, Min: -4, Max: 4, Pos: pos(4, 1)},
		OutputName: "risk",
		Precision:  24,
		Insecure:   true,
		Pin:        &ir.ParamPin{LogN: 14, LogQ: []int{50, 35, 35}, LogP: []int{50}, LogScale: 35, Pos: pos(12, 1)},
		Layers: []*ir.Layer{
			{Name: "dense1", Kind: ir.Dense, Pos: pos(18, 5), In: 3, Out: 2,
				Weights: [][]float64{{1, 2, 3}, {4, 5.5, -0.6}}, Bias: []float64{0.5, -0.5}},
			{Name: "act1", Kind: ir.Activation, Pos: pos(22, 5), In: 2, Out: 2,
				Act: &ir.Act{Func: ir.Tanh, Interval: [2]float64{-4, 4}, Degree: 7}},
			{Name: "sq", Kind: ir.Activation, Pos: pos(25, 5), In: 2, Out: 2,
				Act: &ir.Act{Func: ir.Square}},
			{Name: "head", Kind: ir.Dense, Pos: pos(28, 5), In: 2, Out: 1,
				Weights: [][]float64{{0.25, -1}}, Bias: []float64{0}},
			{Name: "act3", Kind: ir.Activation, Pos: pos(33, 5), In: 1, Out: 1,
				Act: &ir.Act{Func: ir.Poly, Basis: ir.Monomial, Coeffs: []float64{0, 0.5, 0.125}, Interval: [2]float64{-2, 2}}},
			{Name: "act4", Kind: ir.Activation, Pos: pos(37, 5), In: 1, Out: 1,
				Act: &ir.Act{Func: ir.ReLU, Interval: [2]float64{-1, 1}, Degree: 9}},
		},
	}
	compareGraphs(t, g, want)
	if !reflect.DeepEqual(files, []string{"gearbox.yaml"}) {
		t.Errorf("files %q, want just the spec", files)
	}
}

func compareGraphs(t *testing.T, g, want *ir.Graph) {
	t.Helper()
	if len(g.Layers) != len(want.Layers) {
		t.Fatalf("%d layers, want %d", len(g.Layers), len(want.Layers))
	}
	for i := range want.Layers {
		if !reflect.DeepEqual(g.Layers[i], want.Layers[i]) {
			t.Errorf("layer %d:\n got %+v act %+v\nwant %+v act %+v", i, *g.Layers[i], g.Layers[i].Act, *want.Layers[i], want.Layers[i].Act)
		}
	}
	gl, wl := g.Layers, want.Layers
	g.Layers, want.Layers = nil, nil
	defer func() { g.Layers, want.Layers = gl, wl }()
	if !reflect.DeepEqual(g, want) {
		t.Errorf("graph:\n got %+v pin %+v\nwant %+v pin %+v", *g, g.Pin, *want, want.Pin)
	}
}

const npySpec = `lanthorn: 1
model: tiny
input:
  size: 2
  range: [0, 1.5]
layers:
  - kind: dense
    out: 3
    weights: weights/dense1_w.npy
    bias: weights/dense1_b.npy
  - kind: activation
    function: sigmoid
    interval: [-6, 6]
  - kind: dense
    out: 1
    weights: ./weights/dense2_w.npy
  - kind: dense
    out: 1
    weights: weights/dense1_b.npy/../dense3_w.npy
`

func npyWeights(t testing.TB) fstest.MapFS {
	return fstest.MapFS{
		"weights/dense1_w.npy": npyBytes(t, []float64{1, 2, 3, 4, 5, 6}, 3, 2),
		"weights/dense1_b.npy": npyBytes(t, []float64{0.1, 0.2, 0.3}, 3),
		"weights/dense2_w.npy": npyBytes(t, []float64{-1, 0, 1}, 1, 3),
		"weights/dense3_w.npy": npyBytes(t, []float64{2}, 1, 1),
	}
}

func TestParseNPY(t *testing.T) {
	g, files, err := parseSafely(t, "tiny.yaml", npySpec, npyWeights(t))
	if err != nil {
		t.Fatal(err)
	}
	p := func(line, col int) ir.Pos { return ir.Pos{File: "tiny.yaml", Line: line, Col: col} }
	want := &ir.Graph{
		Name:       "tiny",
		SpecFile:   "tiny.yaml",
		Input:      ir.Input{Name: "input", Size: 2, Min: 0, Max: 1.5, Pos: p(3, 1)},
		OutputName: "output",
		Precision:  20,
		Layers: []*ir.Layer{
			{Name: "dense1", Kind: ir.Dense, Pos: p(7, 5), In: 2, Out: 3,
				Weights: [][]float64{{1, 2}, {3, 4}, {5, 6}}, Bias: []float64{0.1, 0.2, 0.3}},
			{Name: "act1", Kind: ir.Activation, Pos: p(11, 5), In: 3, Out: 3,
				Act: &ir.Act{Func: ir.Sigmoid, Interval: [2]float64{-6, 6}, Degree: 7}},
			{Name: "dense2", Kind: ir.Dense, Pos: p(14, 5), In: 3, Out: 1,
				Weights: [][]float64{{-1, 0, 1}}, Bias: []float64{0}},
			{Name: "dense3", Kind: ir.Dense, Pos: p(17, 5), In: 1, Out: 1,
				Weights: [][]float64{{2}}, Bias: []float64{0}},
		},
	}
	compareGraphs(t, g, want)
	wantFiles := []string{"tiny.yaml", "weights/dense1_w.npy", "weights/dense1_b.npy", "weights/dense2_w.npy", "weights/dense3_w.npy"}
	if !reflect.DeepEqual(files, wantFiles) {
		t.Errorf("files %q, want %q", files, wantFiles)
	}
}

// Load reads through os.DirFS; its missing-file error reads like fs.FS's.
func TestLoad(t *testing.T) {
	dir := t.TempDir()
	for name, f := range npyWeights(t) {
		path := filepath.Join(dir, filepath.FromSlash(name))
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, f.Data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	spec := filepath.Join(dir, "tiny.yaml")
	if err := os.WriteFile(spec, []byte(npySpec), 0o644); err != nil {
		t.Fatal(err)
	}
	g, err := Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	if g.SpecFile != "tiny.yaml" || g.Layers[0].Pos.File != "tiny.yaml" || len(g.Layers) != 4 {
		t.Errorf("Load: spec file %q, first layer at %v, %d layers", g.SpecFile, g.Layers[0].Pos, len(g.Layers))
	}
	if err := os.Remove(filepath.Join(dir, "weights", "dense2_w.npy")); err != nil {
		t.Fatal(err)
	}
	_, err = Load(spec)
	want := "tiny.yaml:16:14: dense2: weights: open weights/dense2_w.npy: file does not exist"
	if err == nil || err.Error() != want {
		t.Errorf("Load with a missing weight file: %v, want %q", err, want)
	}
	if _, err := Load(filepath.Join(dir, "nothere.yaml")); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("Load of a missing spec: %v, want a not-exist error", err)
	}
}

// A spec over MaxSpecBytes is refused before it is parsed.
func TestParseTooLarge(t *testing.T) {
	big := "lanthorn: 1\n# " + strings.Repeat("x", MaxSpecBytes) + "\n"
	_, _, err := parseSafely(t, "big.yaml", big, nil)
	if err == nil || !strings.Contains(err.Error(), "big.yaml:1: spec file is larger than the 16 MiB limit") {
		t.Errorf("error %v", err)
	}
}

// Every error of a broken spec is reported, sorted by position.
func TestParseCollectsAllErrors(t *testing.T) {
	src := `lanthorn: 1
model: Gearbox
input:
  size: ten
  range: [4, -4]
precision: 99
layers:
  - kind: dense
    out: 0
    weights: [[1]]
  - kind: activation
    function: tanh
  - kind: dense
    out: 2
    weights: [[1, 2]]
`
	_, _, err := parseSafely(t, "gearbox.yaml", src, nil)
	var list ErrorList
	if !errors.As(err, &list) {
		t.Fatalf("error %v is not an ErrorList", err)
	}
	want := []string{
		`gearbox.yaml:2:8: model: found string "Gearbox", expected a lower-case identifier ([a-z][a-z0-9_]*)`,
		`gearbox.yaml:4:9: input.size: found string "ten", expected an integer >= 1`,
		`gearbox.yaml:5:10: input.range [4, -4] is empty; expected [min, max] with min < max`,
		`gearbox.yaml:6:12: precision: found integer 99, expected an integer from 4 to 50 (bits)`,
		`gearbox.yaml:9:10: dense1: out: found integer 0, expected an integer >= 1`,
		`gearbox.yaml:11:5: act1: missing required key "interval": tanh is approximated by a polynomial on an interval [a, b] that holds all its inputs, e.g. interval: [-4, 4]`,
		// dense2's input size is unknown (dense1's out is bad), so only
		// its out is checked against its weights.
		`gearbox.yaml:15:14: dense2: weights shape [1 2], want [2 ?] (out × in)`,
	}
	if got := err.Error(); got != strings.Join(want, "\n") {
		t.Errorf("errors:\n%s\nwant:\n%s", got, strings.Join(want, "\n"))
	}
	if len(list) != len(want) {
		t.Errorf("%d errors, want %d", len(list), len(want))
	}
	var first *Error
	if !errors.As(err, &first) || first.Pos != pos(2, 8) {
		t.Errorf("errors.As found %v, want the first entry", first)
	}
}

// The example in the package documentation is a valid spec.
func TestDocExample(t *testing.T) {
	doc, err := os.ReadFile("doc.go")
	if err != nil {
		t.Fatal(err)
	}
	var src strings.Builder
	in := false
	for _, line := range strings.Split(string(doc), "\n") {
		if strings.HasPrefix(line, "//\tlanthorn: 1") {
			in = true
		}
		if in && !strings.HasPrefix(line, "//\t") {
			break
		}
		if in {
			src.WriteString(strings.TrimPrefix(line, "//\t") + "\n")
		}
	}
	fsys := fstest.MapFS{
		"weights/dense1_w.npy": npyBytes(t, make([]float64, 160), 16, 10),
		"weights/dense1_b.npy": npyBytes(t, make([]float64, 16), 16),
	}
	g, _, err := parseSafely(t, "gearbox.yaml", src.String(), fsys)
	if err != nil {
		t.Fatalf("%v\nin:\n%s", err, src.String())
	}
	var names []string
	for _, l := range g.Layers {
		names = append(names, l.Name)
	}
	if got := strings.Join(names, " "); got != "dense1 act1 dense2 act2" || g.OutSize() != 2 {
		t.Errorf("layers %s, output size %d", got, g.OutSize())
	}
}

// Anchors and aliases are resolved; numbers are read as yaml.v3 reads them.
func TestParseAliasesAndNumbers(t *testing.T) {
	src := `lanthorn: 1
model: aliased
input: {size: 7, range: &r [-1, 1]}
layers:
  - kind: dense
    out: 1
    weights: [[0x10, 0o17, 1_000, 010, 1e3, -2.5, +3]]
  - &sq {kind: activation, function: square}
  - {kind: activation, function: tanh, interval: *r}
  - kind: dense
    out: 2
    weights: [[1], [1]]
  - kind: dense
    out: 2
    weights: &w [[1, 0], [0, 1]]
  - {kind: dense, name: last, out: 2, weights: *w}
`
	g, _, err := parseSafely(t, "aliased.yaml", src, nil)
	if err != nil {
		t.Fatal(err)
	}
	// yaml.v3 reads 010 as octal 8, as YAML 1.1 did (yaml.v3 resolve.go keeps
	// it "for compatibility"; YAML 1.2 would read 10).
	if want := []float64{16, 15, 1000, 8, 1000, -2.5, 3}; !reflect.DeepEqual(g.Layers[0].Weights[0], want) {
		t.Errorf("numbers %v, want %v", g.Layers[0].Weights[0], want)
	}
	if a := g.Layers[2].Act; a.Interval != [2]float64{-1, 1} {
		t.Errorf("aliased interval %v", a.Interval)
	}
	last := g.Layers[len(g.Layers)-1]
	if last.Name != "last" || !reflect.DeepEqual(last.Weights, [][]float64{{1, 0}, {0, 1}}) {
		t.Errorf("aliased weights: %s %v", last.Name, last.Weights)
	}
}

func TestParseOverflowingNumber(t *testing.T) {
	_, _, err := parseSafely(t, "gearbox.yaml", head+"  - kind: dense\n    out: 1\n    weights: [[1e400, 1]]\n", nil)
	want := "gearbox.yaml:9:16: dense1: weights[0][0]: found number 1e400, expected a finite number"
	if err == nil || !strings.Contains(err.Error(), want) {
		t.Errorf("error %v, want %q", err, want)
	}
}

// A spec with very many problems reports the first maxErrors and a count.
func TestParseManyErrors(t *testing.T) {
	var src strings.Builder
	src.WriteString(head)
	for i := 0; i < 300; i++ {
		src.WriteString("  - kind: conv\n")
	}
	_, _, err := parseSafely(t, "gearbox.yaml", src.String(), nil)
	var list ErrorList
	if !errors.As(err, &list) || len(list) != maxErrors+1 {
		t.Fatalf("%d errors, want %d", len(list), maxErrors+1)
	}
	if last := list[maxErrors].Error(); last != "gearbox.yaml:207:11: 100 more problems not shown" {
		t.Errorf("last entry %q", last)
	}
}
