// Package runtime is the thin layer over lattigo v5 that every program
// emitted by lanthorn links: CKKS parameters, key generation, key and
// ciphertext files, weight decoding and plaintext encoding, an evaluator
// whose methods mirror the ciphertext-level IR ops, float64 reference
// helpers and precision statistics.
//
// The generator copies the non-test .go files of this package verbatim into
// each emitted program (at internal/runtime). The copies are generated
// output: do not edit them; change this package and regenerate instead. For
// that reason the package imports only the standard library and lattigo v5,
// never another lanthorn package, and works under any import path.
//
// Emitted code never sees a lattigo type: every one is wrapped here. No
// panic crosses the API: lattigo panics are recovered at the exported
// boundary and returned as errors. The Encoder and the Evaluator keep the
// first error they meet ("sticky" errors), so straight-line generated code
// can run a whole sequence of ops and check Err once at the end.
package runtime

// APIVersion1 names the version of this package's API. Emitted code refers
// to it, so a program built against a runtime of another version fails to
// compile at that line instead of misbehaving: regenerate the program with
// the lanthorn that made the runtime it links (or copy in the runtime of the
// lanthorn that generated it).
const APIVersion1 = 1
