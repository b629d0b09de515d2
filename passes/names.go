package passes

import (
	"fmt"
	"strings"
	"unicode"
)

// nameValues makes every value name and constant identifier a unique Go
// identifier, keeping the spec's layer names: dense1Prod3, Dense1Diag3.
func nameValues(s *State) error {
	p := s.Prog
	taken := map[string]int{}
	for _, kw := range []string{"ev", "pt", "err", "x", "in", "out"} {
		taken[kw] = 1
	}
	for _, v := range p.Values {
		v.Name = unique(taken, identifier(v.Name))
	}
	exported := map[string]int{}
	for _, c := range p.Consts {
		c.Ident = unique(exported, exportedIdent(c.Name))
	}
	return nil
}

func unique(taken map[string]int, name string) string {
	n := taken[name]
	taken[name] = n + 1
	if n == 0 {
		return name
	}
	for {
		cand := fmt.Sprintf("%s%d", name, n+1)
		if taken[cand] == 0 {
			taken[cand] = 1
			return cand
		}
		n++
	}
}

// identifier turns a spec name such as "dense_1" or "act1" into lowerCamel
// Go form: "dense1", "act1".
func identifier(name string) string {
	id := exportedIdent(name)
	if id == "" {
		return "v"
	}
	r := []rune(id)
	r[0] = unicode.ToLower(r[0])
	return string(r)
}

// exportedIdent turns "dense1.diag3" into "Dense1Diag3".
func exportedIdent(name string) string {
	var b strings.Builder
	up := true
	for _, r := range name {
		switch {
		case unicode.IsLetter(r) || (unicode.IsDigit(r) && b.Len() > 0):
			if up {
				r = unicode.ToUpper(r)
			}
			b.WriteRune(r)
			up = false
		case unicode.IsDigit(r):
			b.WriteString("V")
			b.WriteRune(r)
			up = false
		default:
			up = true
		}
	}
	return b.String()
}
