package emit

import (
	_ "embed"
	"fmt"
)

// The emitted program's module files. They pin lattigo and its own
// requirements; they depend only on what the runtime imports, so they are
// kept here as files, and the end-to-end test checks with `go mod tidy
// -diff` that an emitted program's go.mod and go.sum are exactly tidy.
var (
	//go:embed modfiles/require.txt
	goRequire string
	//go:embed modfiles/go.sum
	goSum string
)

func goMod(module string) []byte {
	return fmt.Appendf(nil, "module %s\n\ngo 1.26\n\n%s", module, goRequire)
}
