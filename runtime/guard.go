package runtime

import "fmt"

// recoverTo turns a panic raised below an exported function into an error
// stored in *err. It is deferred at every exported boundary that calls into
// lattigo, as a last line of defence: inputs are checked before lattigo sees
// them, so reaching it means a check is missing here.
//
// Fatal runtime errors (stack exhaustion, out of memory) cannot be
// recovered; the checks on sizes and shapes before lattigo is called are
// what keep them away.
//
// what prefixes the message; an empty what adds no prefix.
func recoverTo(err *error, what string) {
	if r := recover(); r != nil {
		*err = fmt.Errorf("internal error in lattigo: %v", r)
		if what != "" {
			*err = fmt.Errorf("%s: %w", what, *err)
		}
	}
}
