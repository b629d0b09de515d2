// Package bench measures what the compiler's optimisations buy. Its one
// benchmark builds, for every testdata model, the program lanthorn emits
// with every pass on and the naive lowering of the same model
// (passes.Options.Naive), runs each program's own bench command, prices the
// lower bound of the optimised program's layout (passes.LowerBound) with
// primitives measured in the same run, and prints one table:
//
//	go test ./bench -run '^$' -bench . -benchtime 1x
//
// The package has no tests of its own beyond fast checks of the table's
// formatting; nothing runs without -bench.
package bench
