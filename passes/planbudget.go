package passes

import "fmt"

// PlanBudget shows what a key budget costs: the keys and estimated latency
// of the program with the exact rotation key set and with the set the
// budget allows.
type PlanBudget struct {
	LimitBytes int64       `json:"limit_bytes"`
	Exact      BudgetPoint `json:"exact"`
	Budgeted   BudgetPoint `json:"budgeted"`
	// Composed rotations are chains of key steps; Added is the number of
	// key switches the chains add.
	Composed int `json:"composed_rotations"`
	Added    int `json:"added_key_switches"`
}

// BudgetPoint is one key set: its keys, their size and the program's
// estimated latency with it.
type BudgetPoint struct {
	Rotations  []int   `json:"rotations"`
	Count      int     `json:"count"` // keys, the relinearization key included
	Bytes      int64   `json:"bytes"` // the evaluation-keys file keygen writes (keyFileBytes)
	EstimateMS float64 `json:"estimate_ms"`
}

// planBudget prices both points of a budgeted compilation with prof; nil
// when no budget was set.
func planBudget(st *State, prof *Profile, plan *Plan) *PlanBudget {
	rep := st.Report.Budget
	if rep == nil {
		return nil
	}
	fixed := 0
	if plan.Keys.Relinearize {
		fixed = 1
	}
	pr, relin := st.Prog.Params, plan.Keys.Relinearize
	exact := BudgetPoint{Rotations: rep.ExactSteps, Count: len(rep.ExactSteps) + fixed,
		Bytes: keyFileBytes(pr, stepLevels(rep.Exact, rep.ExactSteps), relin), EstimateMS: EstimateProgram(rep.Exact, prof).TotalMS}
	budgeted := BudgetPoint{Rotations: plan.Keys.Rotations, Count: plan.Keys.Count,
		Bytes: plan.Keys.Bytes, EstimateMS: plan.EstimateMS}
	return &PlanBudget{LimitBytes: rep.LimitBytes, Exact: exact, Budgeted: budgeted, Composed: rep.Composed, Added: rep.Added}
}

// String says both points in one sentence, for the text and Markdown plans.
func (b *PlanBudget) String() string {
	mb := func(n int64) float64 { return float64(n) / 1e6 }
	if b.Added == 0 && b.Composed == 0 {
		return fmt.Sprintf("key budget %.1f MB: the exact key set fits (%d keys, %.1f MB, est. %.1f ms)",
			mb(b.LimitBytes), b.Exact.Count, mb(b.Exact.Bytes), b.Exact.EstimateMS)
	}
	return fmt.Sprintf("key budget %.1f MB: exact key set %d keys, %.1f MB, est. %.1f ms; within the budget %d keys, %.1f MB, est. %.1f ms (%d rotations composed, %d more key switches, %+.1f ms)",
		mb(b.LimitBytes), b.Exact.Count, mb(b.Exact.Bytes), b.Exact.EstimateMS,
		b.Budgeted.Count, mb(b.Budgeted.Bytes), b.Budgeted.EstimateMS, b.Composed, b.Added, b.Budgeted.EstimateMS-b.Exact.EstimateMS)
}
