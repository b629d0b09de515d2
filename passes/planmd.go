package passes

import (
	"fmt"
	"strings"
)

// Markdown renders the plan for a pull-request description or a README.
func (p *Plan) Markdown() string {
	var b strings.Builder
	pr := p.Params
	fmt.Fprintf(&b, "### Encrypted evaluation plan: `%s`\n\n", p.Model)
	fmt.Fprintf(&b, "| parameter | value |\n|---|---|\n")
	fmt.Fprintf(&b, "| ring degree | 2^%d |\n| ciphertext primes (bits) | %v |\n| key-switching primes (bits) | %v |\n| default scale | 2^%d |\n| depth | %d |\n| log2(QP) | %d (128-bit bound %d) |\n\n",
		pr.LogN, pr.LogQ, pr.LogP, pr.LogScale, pr.Depth, pr.LogQP, pr.Bound)
	fmt.Fprintf(&b, "Security bound: %s.", pr.BoundSource)
	if pr.Insecure {
		fmt.Fprintf(&b, " **INSECURE: above the bound (`insecure: true`).**")
	}
	fmt.Fprintf(&b, "\n\n")
	for _, why := range pr.Why {
		fmt.Fprintf(&b, "- %s\n", why)
	}
	fmt.Fprintf(&b, "\n| layer | source | kind | levels | rotations | key switches | pt mults | ct mults | rescales | est. ms |\n|---|---|---|---|---|---|---|---|---|---|\n")
	for _, r := range append(p.Layers, p.Total) {
		fmt.Fprintf(&b, "| %s | %s | %s | %d→%d | %d | %d | %d | %d | %d | %.1f |\n", r.Layer, r.Source, r.Kind, r.LevelIn, r.LevelOut, r.Rotations, r.KeySwitches, r.PlainMuls, r.CtMuls, r.Rescales, r.EstimateMS)
	}
	fmt.Fprintf(&b, "\nEvaluation keys: %d (rotations %v, relinearization %v), %.1f MB. Ciphertexts: upload %.2f MB%s, download %.2f MB%s. Estimated latency %.1f ms (profile: %s).\n",
		p.Keys.Count, p.Keys.Rotations, p.Keys.Relinearize, float64(p.Keys.Bytes)/1e6, float64(p.UploadB)/1e6, p.ctCount(p.UploadCts), float64(p.DownloadB)/1e6, p.ctCount(p.DownloadCts), p.EstimateMS, p.Profile)
	if p.Budget != nil {
		line := p.Budget.String()
		fmt.Fprintf(&b, "\n%s%s.\n", strings.ToUpper(line[:1]), line[1:])
	}
	if c := p.ChoicesMarkdown(); c != "" {
		fmt.Fprintf(&b, "\n%s", c)
	}
	return b.String()
}

// ctCount says " in N ciphertexts" for a vector of more than one
// ciphertext, nothing otherwise.
func (p *Plan) ctCount(n int) string {
	if n <= 1 {
		return ""
	}
	return fmt.Sprintf(" in %d ciphertexts", n)
}
