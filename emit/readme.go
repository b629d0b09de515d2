package emit

import (
	"fmt"
	"strings"
)

// readme writes the emitted program's README: what it is, how to use it,
// the plan summary and the cautions.
func (e *emitter) readme() []byte {
	p := e.p
	pr := p.Params
	var b strings.Builder
	w := func(format string, args ...any) { fmt.Fprintf(&b, format, args...) }
	w("# %s: encrypted inference\n\n", p.Name)
	w("<!-- %s -->\n\n", strings.ReplaceAll(e.header(), "\n", " · "))
	w("This program evaluates the `%s` model on inputs encrypted under the CKKS scheme.\n", p.Name)
	w("The client holds the secret key, encrypts its `%s` vector (%d values in [%g, %g]) and decrypts the result `%s` (%d values);\n",
		p.InputName, p.InputSize, e.in.Model.Input.Min, e.in.Model.Input.Max, p.OutputName, p.OutputSize)
	w("the server evaluates the model with evaluation keys only and never sees the inputs or outputs in the clear.\n\n")
	w("It was written by lanthorn from `%s` and builds on its own: `go build ./...` needs only this folder and the modules in go.sum.\n\n", e.opts.SpecPath)

	w("## Cautions\n\n")
	w("- **Security estimate.** The parameters below claim 128-bit security only because log2(QP) = %d is within the bound for ring degree 2^%d in the %s. No other analysis was done.\n", pr.LogQP, pr.LogN, strings.TrimSuffix(sourceShort(), "."))
	if pr.Insecure {
		w("- **INSECURE PARAMETERS.** The spec set `insecure: true`; these parameters exceed the 128-bit bound. Do not protect real data with them.\n")
	}
	w("- **Never reveal decrypted results to the party that evaluated.** Decrypted CKKS values carry noise that depends on the secret key; handing them back to the server can let it recover the key (Li and Micciancio, 2021). If a result must be shared, share a value rounded to the precision you need (`decrypt -round`), never the raw decryption.\n")
	w("- **Not audited.** Neither lanthorn nor this program has been reviewed by a cryptographer. Defer to a qualified cryptographer before protecting real data.\n")
	w("- The secret key file is written with mode 0600 and only the client commands (`keygen`, `encrypt`, `decrypt`, `selftest`, `bench`) read it; `eval` reads only the evaluation keys.\n\n")

	w("## Use\n\n```\n")
	w("go build ./...\n")
	w("go run ./cmd/%s selftest                          # keys, encrypt, evaluate, decrypt, compare with float64\n", p.Name)
	w("go run ./cmd/%s keygen -dir keys                  # client: keys/secret.key and keys/eval/eval.keys\n", p.Name)
	w("go run ./cmd/%s encrypt -keys keys -in input.csv -out x.ct   # client: one vector per line\n", p.Name)
	w("go run ./cmd/%s eval -keys keys/eval -in x.ct -out y.ct      # server: no secret key\n", p.Name)
	w("go run ./cmd/%s decrypt -keys keys -in y.ct                  # client: prints the outputs\n", p.Name)
	w("go run ./cmd/%s bench -n 10                       # latency of one evaluation, key size, peak memory (-json for tools)\n", p.Name)
	w("```\n\n")
	w("`eval`, `selftest` and `bench` compute on `-threads N` goroutines (default: all cores); the result is the same ciphertext for any number.\n\n")

	w("## Plan\n\n")
	if e.in.Plan != nil {
		md := e.in.Plan.Markdown()
		w("%s", md[strings.Index(md, "\n")+1:]) // the plan without its own title
		w("\nSlot layout: period %d (vectors in slots [0, n), zero-padded, replicated over all slots).\n", p.Period)
		if p.Input.Count() > 1 || p.Output.Count() > 1 {
			w("Vectors wider than one period are split in chunks of %d values, one ciphertext each: the input takes %d ciphertexts (%s), the output %d.\n",
				p.Period, p.Input.Count(), p.Input, p.Output.Count())
		}
	} else {
		w("| | |\n|---|---|\n")
		w("| ring degree | 2^%d (%d slots) |\n", pr.LogN, pr.Slots())
		w("| ciphertext primes | %d: %v bits |\n", len(pr.LogQ), pr.LogQ)
		w("| key-switching primes | %v bits |\n", pr.LogP)
		w("| log2(QP) | %d (128-bit bound %d) |\n", pr.LogQP, pr.SecurityBound)
		w("| rotation keys | %d: %v |\n", len(p.Rotations), p.Rotations)
	}
	if len(e.in.Notes) > 0 {
		w("\nCompiler notes:\n\n")
		for _, n := range e.in.Notes {
			w("- %s\n", n)
		}
	}
	w("\n## Files\n\n")
	w("- `model.go`: `Load` encodes the weights once; `Evaluate` is the encrypted model, one statement per ciphertext operation, with a comment per layer naming its spec line.\n")
	w("- `params.go`: the CKKS parameters and the evaluation keys needed.\n")
	w("- `weights.go`, `weights.bin`: the weights, checked against their SHA-256 at load.\n")
	w("- `reference.go`: the same model in float64.\n")
	w("- `cmd/%s`: the command line.\n", p.Name)
	w("- `internal/runtime`: lanthorn's runtime over lattigo v5, copied verbatim; do not edit it, regenerate instead.\n")
	return []byte(b.String())
}

func sourceShort() string {
	return "HomomorphicEncryption.org Security Standard (2018), Table 1"
}
