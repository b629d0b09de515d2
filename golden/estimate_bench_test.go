package golden

import (
	"path/filepath"
	"regexp"
	"testing"
	"time"

	"github.com/lanthorn/lanthorn/passes"
)

var latencyLine = regexp.MustCompile(`latency of one encrypted evaluation:\s+(\S+) median`)

// BenchmarkEstimateVsMeasured holds the cost model to account: for every
// testdata model it prints the planner's estimated latency of one
// encrypted evaluation next to the median measured by the emitted program's
// self-test in the same run, and their ratio (target within ±25%).
//
//	go test ./golden -run '^$' -bench EstimateVsMeasured -benchtime 1x
func BenchmarkEstimateVsMeasured(b *testing.B) {
	for _, c := range cases(b) {
		if c.bad {
			continue
		}
		b.Run(c.name, func(b *testing.B) {
			files, st, _, err := build(c)
			if err != nil {
				b.Fatal(err)
			}
			plan := passes.MakePlan(st, passes.DefaultProfile())
			dir := writeProgram(b, files)
			bin := filepath.Join(dir, "bin", st.Prog.Name)
			if out, err := goWithEnv(dir, userGoEnv(), "build", "-o", bin, "./cmd/"+st.Prog.Name); err != nil {
				b.Fatalf("%v\n%s", err, out)
			}
			for range b.N {
				out := run(b, dir, bin, "selftest", "-n", "7")
				m := latencyLine.FindStringSubmatch(out)
				if m == nil {
					b.Fatalf("no latency in:\n%s", out)
				}
				d, err := time.ParseDuration(m[1])
				if err != nil {
					b.Fatal(err)
				}
				measured := float64(d.Microseconds()) / 1000
				b.ReportMetric(plan.EstimateMS, "est-ms")
				b.ReportMetric(measured, "measured-ms")
				b.ReportMetric(plan.EstimateMS/measured, "est/measured")
			}
		})
	}
}
