package spec

import (
	"sort"
	"strings"

	"github.com/lanthorn/lanthorn/ir"
)

// Error is one problem found in a spec, at the position in the spec file it
// concerns. Problems in weight files point at the key that names the file.
type Error struct {
	Pos ir.Pos
	Msg string
}

// Error formats the problem as file:line:col: message.
func (e *Error) Error() string {
	return e.Pos.String() + ": " + e.Msg
}

// ErrorList is every problem found in a spec, sorted by position. Parse and
// Load return one as their error; it is never empty when returned.
type ErrorList []*Error

// Error joins the problems, one a line.
func (l ErrorList) Error() string {
	var b strings.Builder
	for i, e := range l {
		if i > 0 {
			b.WriteByte('\n')
		}
		b.WriteString(e.Error())
	}
	return b.String()
}

// Unwrap returns the problems as errors, for errors.As and errors.Is.
func (l ErrorList) Unwrap() []error {
	errs := make([]error, len(l))
	for i, e := range l {
		errs[i] = e
	}
	return errs
}

// sort orders the list by line, then column, keeping the order of problems
// found at the same place.
func (l ErrorList) sort() {
	sort.SliceStable(l, func(i, j int) bool {
		a, b := l[i].Pos, l[j].Pos
		if a.File != b.File {
			return a.File < b.File
		}
		if a.Line != b.Line {
			return a.Line < b.Line
		}
		return a.Col < b.Col
	})
}
