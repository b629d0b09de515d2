package spec

import (
	"strings"
	"testing"
)

// output.mask: absent or true masks, false opts out, anything else is an
// error at the value's position.
func TestOutputMask(t *testing.T) {
	const body = "lanthorn: 1\nmodel: gearbox\ninput: {size: 2, range: [-1, 1]}\noutput:\n  name: risk\n%s" +
		"layers:\n  - kind: dense\n    out: 1\n    weights: [[1, 2]]\n"
	for _, tc := range []struct {
		name   string
		line   string
		noMask bool
		err    string
	}{
		{"absent", "", false, ""},
		{"true", "  mask: true\n", false, ""},
		{"false", "  mask: false\n", true, ""},
		{"string", "  mask: \"no\"\n", false, `gearbox.yaml:6:9: output.mask: found string "no", expected true or false`},
		{"number", "  mask: 0\n", false, `gearbox.yaml:6:9: output.mask: found integer 0, expected true or false`},
		{"list", "  mask: [false]\n", false, `gearbox.yaml:6:9: output.mask: found a list of 1 item, expected true or false`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			src := strings.Replace(body, "%s", tc.line, 1)
			g, _, err := parseSafely(t, "gearbox.yaml", src, nil)
			if tc.err != "" {
				if err == nil || !strings.Contains(err.Error(), tc.err) {
					t.Fatalf("error %v, want %q", err, tc.err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if g.NoOutputMask != tc.noMask {
				t.Errorf("NoOutputMask %v, want %v", g.NoOutputMask, tc.noMask)
			}
		})
	}
}
