package ir

import (
	"fmt"
	"strings"
)

// Scale is an exact CKKS scale, 2^Pow2 · Π q_l^Q[l], where q_l is the
// ciphertext prime of level l. Keeping scales symbolic makes equality exact:
// the planner never compares floating-point numbers to decide whether two
// operands may be added.
type Scale struct {
	Pow2 int
	Q    []int // exponent of q_l, trailing zeros trimmed
}

// Pow2Scale returns 2^e.
func Pow2Scale(e int) Scale { return Scale{Pow2: e} }

// Mul returns s·t.
func (s Scale) Mul(t Scale) Scale {
	r := Scale{Pow2: s.Pow2 + t.Pow2}
	n := max(len(s.Q), len(t.Q))
	r.Q = make([]int, n)
	for i := range r.Q {
		r.Q[i] = s.exp(i) + t.exp(i)
	}
	return r.trim()
}

// Div returns s/t.
func (s Scale) Div(t Scale) Scale { return s.Mul(t.Inv()) }

// Inv returns 1/s.
func (s Scale) Inv() Scale {
	r := Scale{Pow2: -s.Pow2, Q: make([]int, len(s.Q))}
	for i, e := range s.Q {
		r.Q[i] = -e
	}
	return r.trim()
}

// Prime returns q_l.
func Prime(l int) Scale {
	q := make([]int, l+1)
	q[l] = 1
	return Scale{Q: q}
}

// Equal reports whether two scales are the same number.
func (s Scale) Equal(t Scale) bool {
	if s.Pow2 != t.Pow2 {
		return false
	}
	for i := 0; i < max(len(s.Q), len(t.Q)); i++ {
		if s.exp(i) != t.exp(i) {
			return false
		}
	}
	return true
}

// IsZero reports whether the scale was never set.
func (s Scale) IsZero() bool { return s.Pow2 == 0 && len(s.Q) == 0 }

// Num lists the levels whose prime multiplies the scale, with repetition.
func (s Scale) Num() []int { return s.factors(1) }

// Den lists the levels whose prime divides the scale, with repetition.
func (s Scale) Den() []int { return s.factors(-1) }

func (s Scale) factors(sign int) []int {
	var out []int
	for l, e := range s.Q {
		for k := 0; k < e*sign; k++ {
			out = append(out, l)
		}
	}
	return out
}

// Log2 approximates log2 of the scale, taking every prime as 2^logQ[l].
func (s Scale) Log2(logQ []int) int {
	v := s.Pow2
	for l, e := range s.Q {
		if l < len(logQ) {
			v += e * logQ[l]
		}
	}
	return v
}

func (s Scale) exp(i int) int {
	if i < len(s.Q) {
		return s.Q[i]
	}
	return 0
}

func (s Scale) trim() Scale {
	n := len(s.Q)
	for n > 0 && s.Q[n-1] == 0 {
		n--
	}
	if n == 0 {
		s.Q = nil
	} else {
		s.Q = s.Q[:n]
	}
	return s
}

// String prints the scale as 2^40·q6/q7.
func (s Scale) String() string {
	var b strings.Builder
	num := s.Num()
	if s.Pow2 != 0 || len(num) == 0 {
		fmt.Fprintf(&b, "2^%d", s.Pow2)
	}
	for i, l := range num {
		if i > 0 || b.Len() > 0 {
			b.WriteString("·")
		}
		fmt.Fprintf(&b, "q%d", l)
	}
	for _, l := range s.Den() {
		fmt.Fprintf(&b, "/q%d", l)
	}
	return b.String()
}
