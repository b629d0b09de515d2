package passes

import (
	"github.com/lanthorn/lanthorn/ir"
)

// Plan is the reviewable summary of a compiled program: parameters and why,
// a row per layer, totals, keys and traffic.
type Plan struct {
	Model     string     `json:"model"`
	Params    PlanParams `json:"params"`
	Layers    []PlanRow  `json:"layers"`
	Total     PlanRow    `json:"total"`
	Keys      PlanKeys   `json:"keys"`
	UploadB   int64      `json:"upload_bytes"`   // the input's ciphertexts
	DownloadB int64      `json:"download_bytes"` // the output's ciphertexts
	// UploadCts and DownloadCts count the ciphertexts of the input and the
	// output: more than one when a vector is wider than a ciphertext.
	UploadCts   int      `json:"upload_ciphertexts"`
	DownloadCts int      `json:"download_ciphertexts"`
	EstimateMS  float64  `json:"estimate_ms"`
	Profile     string   `json:"profile"`
	Notes       []string `json:"notes"`
	// Alternatives are the variants the selection compiled, cheapest first.
	Alternatives []string `json:"alternatives,omitempty"`
	// Choices are the selection's decisions with their runner-ups.
	Choices []Choice `json:"choices,omitempty"`
	// Budget, under a key budget, gives the exact key set's point and the
	// budget's (keys MB and estimated latency).
	Budget *PlanBudget `json:"key_budget,omitempty"`
}

// PlanParams are the chosen CKKS parameters.
type PlanParams struct {
	LogN          int      `json:"log_n"`
	LogQ          []int    `json:"log_q"`
	LogP          []int    `json:"log_p"`
	LogScale      int      `json:"log_scale"`
	LogQP         int      `json:"log_qp"`
	Bound         int      `json:"bound_128"`
	BoundSource   string   `json:"bound_source"`
	Depth         int      `json:"depth"`
	PrecisionBits int      `json:"precision_bits"`
	Insecure      bool     `json:"insecure"`
	Why           []string `json:"why"`
}

// PlanRow is one layer of the plan.
type PlanRow struct {
	Layer       string  `json:"layer"`
	Source      string  `json:"source"`
	Kind        string  `json:"kind"`
	LevelIn     int     `json:"level_in"`
	LevelOut    int     `json:"level_out"`
	Rotations   int     `json:"rotations"`
	KeySwitches int     `json:"key_switches"`
	PlainMuls   int     `json:"plaintext_muls"`
	CtMuls      int     `json:"ciphertext_muls"`
	Rescales    int     `json:"rescales"`
	EstimateMS  float64 `json:"estimate_ms"`
}

// PlanKeys are the evaluation keys the server needs.
type PlanKeys struct {
	Rotations   []int `json:"rotations"`
	Relinearize bool  `json:"relinearize"`
	Count       int   `json:"count"`
	Bytes       int64 `json:"bytes"`
}

// MakePlan summarises a compiled program priced with a profile.
func MakePlan(st *State, prof *Profile) *Plan {
	p := st.Prog
	pr := p.Params
	est := EstimateProgram(p, prof)
	plan := &Plan{
		Model: p.Name,
		Params: PlanParams{LogN: pr.LogN, LogQ: pr.LogQ, LogP: pr.LogP, LogScale: pr.LogScale, LogQP: pr.LogQP,
			Bound: pr.SecurityBound, BoundSource: SecuritySource, Depth: programDepth(p),
			PrecisionBits: st.Graph.Precision, Insecure: pr.Insecure, Why: pr.Why},
		EstimateMS: est.TotalMS,
		Profile:    prof.Machine,
		Notes:      st.Report.Notes,
		Choices:    st.Report.Choices,
	}
	for i, l := range p.Layers {
		row := PlanRow{Layer: l.Name, Source: l.Pos.String(), Kind: l.Kind, LevelIn: l.LevelIn, LevelOut: l.LevelOut,
			Rotations: l.Rotations, KeySwitches: l.Rotations + l.Relins, PlainMuls: l.PlainMuls, CtMuls: l.CtMuls,
			Rescales: l.Rescales, EstimateMS: est.LayerMS[i]}
		if l.Depth > 0 { // a polynomial's own products and key switches
			row.CtMuls, row.KeySwitches, row.Rescales = polyProducts(len(p.Consts[polyConst(p, i)].Data)-1), polyProducts(len(p.Consts[polyConst(p, i)].Data)-1), l.Depth
		}
		plan.Layers = append(plan.Layers, row)
		t := &plan.Total
		t.Rotations += row.Rotations
		t.KeySwitches += row.KeySwitches
		t.PlainMuls += row.PlainMuls
		t.CtMuls += row.CtMuls
		t.Rescales += row.Rescales
		t.EstimateMS += row.EstimateMS
	}
	plan.Total.Layer = "total"
	if len(p.Layers) > 0 {
		plan.Total.LevelIn, plan.Total.LevelOut = p.Layers[0].LevelIn, p.Layers[len(p.Layers)-1].LevelOut
	}
	keys := len(p.Rotations)
	if p.Relinearize {
		keys++
	}
	plan.Keys = PlanKeys{Rotations: p.Rotations, Relinearize: p.Relinearize, Count: keys, Bytes: keyFileBytes(pr, stepLevels(p, p.Rotations), p.Relinearize)}
	plan.UploadCts, plan.DownloadCts = p.Input.Count(), p.Output.Count()
	plan.UploadB = int64(plan.UploadCts) * ciphertextBytes(pr, pr.MaxLevel())
	plan.DownloadB = int64(plan.DownloadCts) * ciphertextBytes(pr, plan.Total.LevelOut)
	plan.Budget = planBudget(st, prof, plan)
	return plan
}

func polyConst(p *ir.Program, layer int) int {
	for _, op := range p.Ops {
		if op.Layer == layer && op.Kind == ir.OpPoly {
			return op.Const
		}
	}
	return 0
}

// polyProducts is the number of ciphertext products of a Paterson–Stockmeyer
// evaluation of degree d, as priced by polyCost.
func polyProducts(d int) int {
	k := ir.PolyDepth(d)
	baby := 1 << ((k + 1) / 2)
	return baby + (k - (k+1)/2) + (d+1)/baby
}

// keyBytes is the size of one key-switching key at the top level: one
// gadget ciphertext row (2 polynomials over Q·P) per decomposition digit,
// a digit being as many Q primes as there are P primes; 8 bytes a
// coefficient.
func keyBytes(pr ir.Params) int64 {
	n := int64(1) << pr.LogN
	q, pp := int64(len(pr.LogQ)), int64(len(pr.LogP))
	digits := (q + pp - 1) / pp
	return digits * 2 * (q + pp) * n * 8
}

// ciphertextBytes is the size of a degree-1 ciphertext at level ℓ.
func ciphertextBytes(pr ir.Params, level int) int64 {
	return 2 * int64(level+1) * (int64(1) << pr.LogN) * 8
}
