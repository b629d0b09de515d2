package spec

import (
	"errors"
	"fmt"
	"io/fs"
	"math"
	"regexp"
	"strconv"
	"strings"
	"unicode/utf8"

	"gopkg.in/yaml.v3"

	"github.com/lanthorn/lanthorn/ir"
)

// parser walks a decoded spec, collecting every problem it finds.
type parser struct {
	file  string
	fsys  fs.FS
	errs  ErrorList
	files []string // weight files named, in order of first mention
	seen  map[string]bool
	// tolerance is the model's default tolerance for approximated
	// activations (top-level tolerance key), 0 when absent.
	tolerance float64

	// YAML aliases let a small document name a huge tree. Every node the
	// walk visits is charged to work; past budget the walk stops.
	work, budget int
	exhausted    bool
}

// unknownSize marks a vector length that could not be determined because of
// an earlier error; checks that need it are skipped.
const unknownSize = -1

// maxReported is how many bad elements of one list are reported one by one.
const maxReported = 5

func (p *parser) pos(n *yaml.Node) ir.Pos {
	return ir.Pos{File: p.file, Line: n.Line, Col: n.Column}
}

func (p *parser) errorf(n *yaml.Node, format string, args ...any) {
	p.errs = append(p.errs, &Error{Pos: p.pos(n), Msg: fmt.Sprintf(format, args...)})
}

// charge accounts for visiting k more nodes at n and reports whether the
// walk may go on.
func (p *parser) charge(k int, n *yaml.Node) bool {
	if p.exhausted {
		return false
	}
	p.work += k
	if p.work > p.budget {
		p.exhausted = true
		p.errorf(n, "the spec's YAML aliases expand into too much data; stopped reading here")
		return false
	}
	return true
}

// resolve follows aliases to the node they name.
func resolve(n *yaml.Node) *yaml.Node {
	for i := 0; n.Kind == yaml.AliasNode && n.Alias != nil && i < 64; i++ {
		n = n.Alias
	}
	return n
}

// describe says what a node is, for "found X, expected Y" messages.
func describe(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a mapping"
	case yaml.SequenceNode:
		if len(n.Content) == 0 {
			return "an empty list"
		}
		if len(n.Content) == 1 {
			return "a list of 1 item"
		}
		return fmt.Sprintf("a list of %d items", len(n.Content))
	case yaml.AliasNode:
		return "an alias"
	case yaml.DocumentNode:
		return "a document"
	case yaml.ScalarNode:
	default:
		return "nothing"
	}
	v := n.Value
	if utf8.RuneCountInString(v) > 40 {
		v = string([]rune(v)[:37]) + "..."
	}
	switch tag := n.ShortTag(); tag {
	case "!!str":
		return "string " + strconv.Quote(v)
	case "!!int":
		return "integer " + v
	case "!!float":
		return "number " + v
	case "!!bool":
		return "boolean " + v
	case "!!null":
		if n.Value == "" {
			return "no value"
		}
		return "null"
	case "!!timestamp":
		return "timestamp " + v
	default:
		return tag + " " + strconv.Quote(v)
	}
}

// field is one key: value pair of a mapping, aliases resolved.
type field struct{ key, val *yaml.Node }

// fields are the pairs of a mapping, in order and by key.
type fields struct {
	list []field
	m    map[string]field
}

func (f *fields) get(k string) (field, bool) {
	x, ok := f.m[k]
	return x, ok
}

// mapping reads the pairs of mapping node n, reporting duplicate and
// non-scalar keys. where names the mapping in messages ("in input").
func (p *parser) mapping(n *yaml.Node, where string) *fields {
	f := &fields{m: map[string]field{}}
	if !p.charge(len(n.Content), n) {
		return f
	}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := resolve(n.Content[i]), resolve(n.Content[i+1])
		if k.Kind != yaml.ScalarNode {
			p.errorf(k, "found %s as a key %s; keys are names", describe(k), where)
			continue
		}
		if k.ShortTag() == "!!merge" {
			p.errorf(k, "YAML merge keys (<<) are not supported %s", where)
			continue
		}
		if prev, dup := f.m[k.Value]; dup {
			p.errorf(k, "duplicate key %q %s (first at %s)", k.Value, where, p.pos(prev.key))
			continue
		}
		fl := field{k, v}
		f.list = append(f.list, fl)
		f.m[k.Value] = fl
	}
	return f
}

// unknown reports the keys of f not in allowed; shown lists the keys the
// message suggests.
func (p *parser) unknown(f *fields, where string, allowed, shown []string) {
	for _, fl := range f.list {
		ok := false
		for _, a := range allowed {
			if fl.key.Value == a {
				ok = true
				break
			}
		}
		if !ok {
			p.errorf(fl.key, "unknown key %q %s; expected one of: %s", fl.key.Value, where, strings.Join(shown, ", "))
		}
	}
}

// wantMapping checks that n is a mapping.
func (p *parser) wantMapping(n *yaml.Node, what string) bool {
	if n.Kind == yaml.MappingNode {
		return true
	}
	p.errorf(n, "%s: found %s, expected a mapping", what, describe(n))
	return false
}

// integer reads an integer in [lo, hi]; expect describes the range.
func (p *parser) integer(n *yaml.Node, what string, lo, hi int64, expect string) (int, bool) {
	if n.Kind == yaml.ScalarNode && n.ShortTag() == "!!int" {
		var v int64
		var err error
		if plainDecimal(n.Value) {
			v, err = strconv.ParseInt(n.Value, 10, 64)
		} else {
			err = n.Decode(&v)
		}
		if err == nil && v >= lo && v <= hi {
			return int(v), true
		}
		if err == nil && v > hi && hi == MaxElements {
			expect = fmt.Sprintf("at most %d (the size limit)", MaxElements)
		}
	}
	p.errorf(n, "%s: found %s, expected %s", what, describe(n), expect)
	return 0, false
}

// number reads one number (integer or float); problem is "" when it is a
// finite number and otherwise says what is wrong.
func number(n *yaml.Node) (x float64, problem string) {
	if n.Kind == yaml.ScalarNode {
		if tag := n.ShortTag(); tag == "!!int" || tag == "!!float" {
			// strconv is the fast path for the common spellings; yaml.v3
			// decodes the rest (0x10, 0o17, 1_000, .inf) and 0-prefixed
			// integers, which it reads as octal.
			v, err := 0.0, errors.New("not a plain number")
			if tag == "!!float" || plainDecimal(n.Value) {
				v, err = strconv.ParseFloat(n.Value, 64)
				if errors.Is(err, strconv.ErrRange) {
					return 0, fmt.Sprintf("found %s, expected a finite number", describe(n))
				}
			}
			if err != nil {
				err = n.Decode(&v)
			}
			if err == nil {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return 0, fmt.Sprintf("found %s, expected a finite number", describe(n))
				}
				return v, ""
			}
		}
	}
	if n.Kind == yaml.ScalarNode && n.Style == 0 {
		// yaml.v3 takes a float literal past float64's range for a string.
		if _, err := strconv.ParseFloat(n.Value, 64); errors.Is(err, strconv.ErrRange) && !strings.ContainsAny(n.Value, "_xXpP") {
			return 0, fmt.Sprintf("found number %s, expected a finite number", n.Value)
		}
	}
	return 0, fmt.Sprintf("found %s, expected a number", describe(n))
}

// plainDecimal reports whether s is an integer in decimal with no leading
// zero, which strconv and yaml.v3 read alike.
func plainDecimal(s string) bool {
	if s != "" && (s[0] == '-' || s[0] == '+') {
		s = s[1:]
	}
	if s == "" || len(s) > 1 && s[0] == '0' {
		return false
	}
	for i := 0; i < len(s); i++ {
		if s[i] < '0' || s[i] > '9' {
			return false
		}
	}
	return true
}

func (p *parser) boolean(n *yaml.Node, what string) (bool, bool) {
	if n.Kind == yaml.ScalarNode && n.ShortTag() == "!!bool" {
		var b bool
		if err := n.Decode(&b); err == nil {
			return b, true
		}
	}
	p.errorf(n, "%s: found %s, expected true or false", what, describe(n))
	return false, false
}

func (p *parser) str(n *yaml.Node, what, expect string) (string, bool) {
	if n.Kind == yaml.ScalarNode && n.ShortTag() == "!!str" {
		return n.Value, true
	}
	p.errorf(n, "%s: found %s, expected %s", what, describe(n), expect)
	return "", false
}

var (
	modelName = regexp.MustCompile(`^[a-z][a-z0-9_]*$`)
	identName = regexp.MustCompile(`^[A-Za-z_][A-Za-z0-9_]*$`)
)

const (
	modelExpect = "a lower-case identifier ([a-z][a-z0-9_]*)"
	identExpect = "an identifier ([A-Za-z_][A-Za-z0-9_]*)"
)

// goKeywords cannot be model names: the name becomes a Go identifier.
var goKeywords = map[string]bool{
	"break": true, "case": true, "chan": true, "const": true, "continue": true,
	"default": true, "defer": true, "else": true, "fallthrough": true, "for": true,
	"func": true, "go": true, "goto": true, "if": true, "import": true,
	"interface": true, "map": true, "package": true, "range": true, "return": true,
	"select": true, "struct": true, "switch": true, "type": true, "var": true,
}

// ident reads a string matching re.
func (p *parser) ident(n *yaml.Node, what string, re *regexp.Regexp, expect string) (string, bool) {
	s, ok := p.str(n, what, expect)
	if !ok {
		return "", false
	}
	if !re.MatchString(s) {
		p.errorf(n, "%s: found string %s, expected %s", what, strconv.Quote(s), expect)
		return "", false
	}
	return s, true
}

// interval reads [a, b] with finite a < b; names is "min, max" or "a, b".
func (p *parser) interval(n *yaml.Node, what, names string) ([2]float64, bool) {
	var r [2]float64
	if n.Kind != yaml.SequenceNode || len(n.Content) != 2 {
		p.errorf(n, "%s: found %s, expected a list of two numbers [%s]", what, describe(n), names)
		return r, false
	}
	ok := true
	for i, c := range n.Content {
		c = resolve(c)
		x, problem := number(c)
		if problem != "" {
			p.errorf(c, "%s[%d]: %s", what, i, problem)
			ok = false
		}
		r[i] = x
	}
	if ok && !(r[0] < r[1]) {
		lo, hi, _ := strings.Cut(names, ", ")
		p.errorf(n, "%s [%s, %s] is empty; expected [%s] with %s < %s", what, fmtNum(r[0]), fmtNum(r[1]), names, lo, hi)
		ok = false
	}
	return r, ok
}

func fmtNum(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }
