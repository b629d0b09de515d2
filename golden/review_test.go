package golden

import (
	"os"
	"os/exec"
	"testing"

	"github.com/stretchr/testify/require"
)

// Every emitted program passes staticcheck (honnef.co/go/tools), the
// linter reviewers run beside go vet; gofmt -l and go vet are checked by
// TestEndToEnd. .ci/run installs staticcheck and puts it on PATH; where it
// is missing the test is skipped, and says so. STATICCHECK names another
// binary.
func TestEmittedStaticcheck(t *testing.T) {
	if testing.Short() {
		t.Skip("runs staticcheck on every emitted program; skipped with -short")
	}
	bin := os.Getenv("STATICCHECK")
	if bin == "" {
		var err error
		if bin, err = exec.LookPath("staticcheck"); err != nil {
			t.Skip("staticcheck is not on PATH (.ci/run installs it: go install honnef.co/go/tools/cmd/staticcheck@v0.8.2)")
		}
	}
	for _, c := range cases(t) {
		if c.bad {
			continue
		}
		t.Run(c.name, func(t *testing.T) {
			files, _, _, err := build(c)
			require.NoError(t, err)
			dir := writeProgram(t, files)
			cmd := exec.Command(bin, "./...")
			cmd.Dir, cmd.Env = dir, userGoEnv("GOFLAGS=-mod=readonly")
			out, err := cmd.CombinedOutput()
			require.NoError(t, err, "staticcheck ./... on the emitted program:\n%s", out)
		})
	}
}
