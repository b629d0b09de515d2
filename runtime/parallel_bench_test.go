package runtime

import (
	"fmt"
	"testing"
)

// BenchmarkMatVecThreads times the matrix-vector workload (matvec_test.go:
// two 64×64 dense layers by baby-step giant-step with 8 hoisted baby steps,
// and a square, at ring degree 2^13) on 1 and 2 threads. It measures, it
// does not assert; compare the two in one run (cpu-ms/op is the process's
// CPU time per evaluation):
//
//	go test ./runtime -run '^$' -bench MatVecThreads -benchtime 20x
func BenchmarkMatVecThreads(b *testing.B) {
	s := getMV(b, 13)
	in := parEncrypt(b, s.p, s.sk, randVec(5, s.n, -1, 1), s.n)
	for _, threads := range []int{1, 2} {
		b.Run(fmt.Sprintf("threads=%d", threads), func(b *testing.B) {
			ev := NewParallelEvaluator(s.p, s.evk, threads)
			if _, err := s.evaluate(ev, in); err != nil { // warm-up: lanes made
				b.Fatal(err)
			}
			b.ReportAllocs()
			cpu0, ok := processCPU()
			for b.Loop() {
				if _, err := s.evaluate(ev, in); err != nil {
					b.Fatal(err)
				}
			}
			// CPU time per evaluation: equal for 1 and 2 threads when the
			// parallel run adds no work; wall time over CPU time shows how
			// much of the machine the run got.
			if cpu1, _ := processCPU(); ok {
				b.ReportMetric(float64(cpu1-cpu0)/float64(b.N)/1e6, "cpu-ms/op")
			}
		})
	}
}

// BenchmarkRotateHoistedThreads times one hoisted rotation by 7 steps on 1
// and 2 threads (one decomposition, the steps split across workers).
func BenchmarkRotateHoistedThreads(b *testing.B) {
	s := getMV(b, 13)
	in := parEncrypt(b, s.p, s.sk, randVec(5, s.n, -1, 1), s.n)
	for _, threads := range []int{1, 2} {
		b.Run(fmt.Sprintf("threads=%d", threads), func(b *testing.B) {
			ev := NewParallelEvaluator(s.p, s.evk, threads)
			for b.Loop() {
				ev.RotateHoisted(in, 1, 2, 3, 4, 5, 6, 7)
				if err := ev.Err(); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
