package main

import (
	"flag"
	"fmt"
	"math"
)

// keyBudgetFlag adds -max-keys-mb, the bound on the evaluation keys.
func keyBudgetFlag(fs *flag.FlagSet) *float64 {
	return fs.Float64("max-keys-mb", 0, "bound the evaluation keys to `MB` (10^6 bytes): rotations outside a smaller key set are\n"+
		"composed from it, at some latency; the plan shows both points (0: the exact key set, no bound)")
}

// keyBudgetBytes turns the flag's value into Options.MaxKeyBytes.
func keyBudgetBytes(mb float64) (int64, error) {
	if math.IsNaN(mb) || mb < 0 || mb > 1e9 {
		return 0, fmt.Errorf("-max-keys-mb %g: want a size in MB from 0 (no bound) to 10^9", mb)
	}
	return int64(math.Round(mb * 1e6)), nil
}
