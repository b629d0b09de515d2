package spec

import (
	"errors"
	"math"
	"strings"
	"testing"
	"testing/fstest"

	"github.com/lanthorn/lanthorn/ir"
)

// FuzzParse feeds Parse a spec and one .npy file, which the spec can name as
// w.npy or weights/b.npy. Parse must never panic (it would report an
// internal error), every error must carry a line, and every graph it
// returns must be consistent. The seed corpus is in
// testdata/fuzz/FuzzParse.
func FuzzParse(f *testing.F) {
	f.Fuzz(func(t *testing.T, src, npy []byte) {
		fsys := fstest.MapFS{
			"w.npy":         {Data: npy},
			"weights/b.npy": {Data: npy},
		}
		g, err := Parse("fuzz.yaml", src, fsys)
		if err != nil {
			var list ErrorList
			if !errors.As(err, &list) || len(list) == 0 {
				t.Fatalf("error %T %v is not a non-empty ErrorList", err, err)
			}
			for _, e := range list {
				if e.Pos.File != "fuzz.yaml" || e.Pos.Line < 1 {
					t.Fatalf("error without a position: %q", e.Error())
				}
				if strings.Contains(e.Msg, "internal error") {
					t.Fatalf("Parse panicked: %s", e.Msg)
				}
			}
			if g != nil {
				t.Fatal("a graph came with the error")
			}
			return
		}
		checkGraph(t, g)
	})
}

// checkGraph checks the invariants of a graph Parse returns: what later
// passes rely on without checking again.
func checkGraph(t *testing.T, g *ir.Graph) {
	t.Helper()
	if g.Name == "" || g.SpecFile == "" || len(g.Layers) == 0 || g.Input.Size < 1 || !(g.Input.Min < g.Input.Max) ||
		g.Precision < 4 || g.Precision > 50 || g.Input.Name == "" || g.OutputName == "" {
		t.Fatalf("bad graph header: %+v", *g)
	}
	in := g.Input.Size
	names := map[string]bool{}
	for i, l := range g.Layers {
		if l.In != in || l.Out < 1 || names[l.Name] || l.Name == "" || l.Pos.Line < 1 {
			t.Fatalf("layer %d %q: in %d (want %d), out %d, pos %v", i, l.Name, l.In, in, l.Out, l.Pos)
		}
		names[l.Name] = true
		switch l.Kind {
		case ir.Dense:
			if len(l.Weights) != l.Out || len(l.Bias) != l.Out || l.Act != nil {
				t.Fatalf("dense %q: %d rows, %d biases, want %d", l.Name, len(l.Weights), len(l.Bias), l.Out)
			}
			for _, row := range l.Weights {
				if len(row) != l.In {
					t.Fatalf("dense %q: row of %d, want %d", l.Name, len(row), l.In)
				}
				for _, x := range row {
					if math.IsNaN(x) || math.IsInf(x, 0) {
						t.Fatalf("dense %q: weight %v", l.Name, x)
					}
				}
			}
		case ir.Activation:
			a := l.Act
			if a == nil || l.Out != l.In {
				t.Fatalf("activation %q: act %v, in %d, out %d", l.Name, a, l.In, l.Out)
			}
			switch a.Func {
			case ir.Square:
				if a.Degree != 0 || a.Coeffs != nil {
					t.Fatalf("square %q: %+v", l.Name, *a)
				}
			case ir.Poly:
				if a.Basis != ir.Monomial || len(a.Coeffs) < 2 || a.Coeffs[len(a.Coeffs)-1] == 0 || a.Degree != 0 {
					t.Fatalf("poly %q: %+v", l.Name, *a)
				}
			case ir.ReLU, ir.Sigmoid, ir.Tanh:
				if a.Degree < 1 || a.Degree > 63 || !(a.Interval[0] < a.Interval[1]) || a.Coeffs != nil {
					t.Fatalf("%s %q: %+v", a.Func, l.Name, *a)
				}
			default:
				t.Fatalf("activation %q: function %q", l.Name, a.Func)
			}
		default:
			t.Fatalf("layer %q: kind %q", l.Name, l.Kind)
		}
		in = l.Out
	}
}
