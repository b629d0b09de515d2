package runtime

import "embed"

// Sources is this package's own source. lanthorn copies its non-test files
// verbatim into every program it emits, under internal/runtime; in an
// emitted program the variable is unused.
//
//go:embed *.go
var Sources embed.FS
