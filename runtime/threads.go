package runtime

import (
	"flag"
	"fmt"
	goruntime "runtime"
)

// threadsFlag adds -threads to a command: the goroutines an Evaluator
// computes on, GOMAXPROCS by default.
func threadsFlag(fs *flag.FlagSet) *int {
	return fs.Int("threads", goruntime.GOMAXPROCS(0), fmt.Sprintf("evaluate on this many goroutines, 1..%d (results are the same for any number)", MaxThreads))
}

// threadsText is "1 thread" or "n threads".
func threadsText(n int) string {
	if n == 1 {
		return "1 thread"
	}
	return fmt.Sprintf("%d threads", n)
}

// checkThreads refuses a -threads value outside 1..MaxThreads.
func checkThreads(fs *flag.FlagSet, n int) error {
	if n < 1 || n > MaxThreads {
		fmt.Fprintf(fs.Output(), "-threads %d: want 1..%d\n", n, MaxThreads)
		fs.Usage()
		return errCLIUsage
	}
	return nil
}
