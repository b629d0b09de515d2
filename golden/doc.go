// Package golden holds lanthorn's golden tests: every spec under the
// repository's testdata is compiled, and every file of the program emitted
// for it is compared byte for byte with the copy under golden/testdata. A
// change to the emitter shows up as a diff of those copies, which is how a
// reviewer sees what the change does to users' code.
//
//	go test ./golden            # compare
//	go test ./golden -update    # rewrite the copies after an intended change
//
// The runtime, which every program carries verbatim under internal/runtime,
// is not copied here; a test checks that copy against runtime/ instead.
package golden
