package main

import (
	"flag"
	"fmt"

	"github.com/lanthorn/lanthorn/passes"
)

// objectiveFlag adds -objective: what the selection minimises.
func objectiveFlag(fs *flag.FlagSet) *string {
	return fs.String("objective", "latency", "what the selection minimises: `latency` (estimated time of one evaluation) or keys (evaluation-key bytes)")
}

// parseObjective reads the -objective flag's value.
func parseObjective(s string) (passes.Objective, error) {
	o, err := passes.ParseObjective(s)
	if err != nil {
		return o, fmt.Errorf("-objective: %w", err)
	}
	return o, nil
}
