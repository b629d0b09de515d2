package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"text/tabwriter"

	"github.com/lanthorn/lanthorn/passes"
	"github.com/lanthorn/lanthorn/spec"
)

func runPlan(args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("plan", flag.ContinueOnError)
	format := fs.String("format", "text", "output `format`: text, md (for a pull request) or json")
	profile := fs.String("profile", "", "cost model `file` from lanthorn calibrate (default: the embedded reference profile)")
	naive := fs.Bool("naive", false, "plan the naive lowering (one rotation per diagonal, a rescale after every product,\n"+
		"eager relinearization), the benchmark's yardstick")
	objective := objectiveFlag(fs)
	maxKeysMB := keyBudgetFlag(fs)
	chunk := chunkFlag(fs)
	fs.Usage = func() {
		fmt.Fprintf(stderr, "Usage: lanthorn plan SPEC [-format text|md|json] [-profile FILE] [-naive] [-objective latency|keys] [-max-keys-mb MB] [-chunk-slots N]\n\n"+
			"Compiles SPEC and prints its plan: the parameters and why, a row per layer\n"+
			"(levels, rotations, key switches, products, rescales, estimated time),\n"+
			"totals, evaluation keys and ciphertext sizes. Writes no files.\n\nFlags:\n")
		fs.PrintDefaults()
	}
	pos, err := parseFlags(fs, args, stderr)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		fs.Usage()
		return errUsage
	}
	prof, err := loadProfile(*profile)
	if err != nil {
		return err
	}
	g, err := spec.Load(pos[0])
	if err != nil {
		return err
	}
	obj, err := parseObjective(*objective)
	if err != nil {
		return err
	}
	budget, err := keyBudgetBytes(*maxKeysMB)
	if err != nil {
		return err
	}
	slots, err := chunkSlots(*chunk)
	if err != nil {
		return err
	}
	_, st, cands, err := passes.Select(g, passes.Options{Naive: *naive, Objective: obj, MaxKeyBytes: budget, ChunkSlots: slots}, prof, obj)
	if err != nil {
		return err
	}
	plan := passes.MakePlan(st, prof)
	for _, c := range cands {
		plan.Alternatives = append(plan.Alternatives, c.String())
	}
	switch *format {
	case "text":
		return writePlanText(stdout, plan)
	case "md":
		_, err := io.WriteString(stdout, plan.Markdown())
		return err
	case "json":
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(plan)
	}
	return fmt.Errorf("unknown -format %q (want text, md or json)", *format)
}

func writePlanText(w io.Writer, p *passes.Plan) error {
	pr := p.Params
	fmt.Fprintf(w, "plan for %s\n\n", p.Model)
	fmt.Fprintf(w, "parameters: logN %d, logQ %v, logP %v, scale 2^%d, depth %d, log2(QP) %d of %d allowed\n", pr.LogN, pr.LogQ, pr.LogP, pr.LogScale, pr.Depth, pr.LogQP, pr.Bound)
	fmt.Fprintf(w, "security bound: %s\n", pr.BoundSource)
	if pr.Insecure {
		fmt.Fprintf(w, "INSECURE: above the 128-bit bound (the spec says insecure: true)\n")
	}
	for _, why := range pr.Why {
		fmt.Fprintf(w, "  - %s\n", why)
	}
	fmt.Fprintln(w)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "layer\tsource\tkind\tlevels\trotations\tkey switches\tpt mults\tct mults\trescales\test. ms\t")
	for _, r := range append(p.Layers, p.Total) {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%d→%d\t%d\t%d\t%d\t%d\t%d\t%.1f\t\n", r.Layer, r.Source, r.Kind, r.LevelIn, r.LevelOut, r.Rotations, r.KeySwitches, r.PlainMuls, r.CtMuls, r.Rescales, r.EstimateMS)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintf(w, "\nevaluation keys: %d (%d rotations %v, relinearization %v), %.1f MB\n", p.Keys.Count, len(p.Keys.Rotations), p.Keys.Rotations, p.Keys.Relinearize, float64(p.Keys.Bytes)/1e6)
	fmt.Fprintf(w, "ciphertexts: upload %.2f MB%s, download %.2f MB%s\n", float64(p.UploadB)/1e6, ctCount(p.UploadCts), float64(p.DownloadB)/1e6, ctCount(p.DownloadCts))
	fmt.Fprintf(w, "estimated latency: %.1f ms (profile: %s)\n", p.EstimateMS, p.Profile)
	if p.Budget != nil {
		fmt.Fprintf(w, "%s\n", p.Budget)
	}
	for _, n := range p.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	for _, a := range p.Alternatives {
		fmt.Fprintf(w, "considered: %s\n", a)
	}
	return p.WriteChoicesText(w)
}

// ctCount says " in N ciphertexts" for a vector of more than one
// ciphertext, nothing otherwise.
func ctCount(n int) string {
	if n <= 1 {
		return ""
	}
	return fmt.Sprintf(" in %d ciphertexts", n)
}
