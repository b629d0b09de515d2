package bench

import (
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	goruntime "runtime"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/lanthorn/lanthorn/emit"
	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/passes"
	"github.com/lanthorn/lanthorn/runtime"
	"github.com/lanthorn/lanthorn/spec"
)

var (
	runs       = flag.Int("runs", 7, "timed evaluations of each optimised program (the median is reported)")
	naiveRuns  = flag.Int("naive-runs", 3, "timed evaluations of each naive program; 1 where the plan estimates more than -slow-ms")
	slowMS     = flag.Float64("slow-ms", 3000, "planned latency (ms) above which a naive program is timed once")
	keyBudget  = flag.Float64("key-budget-mb", 6000, "a naive program whose evaluation keys exceed this many MB (by its plan) is not run")
	opReps     = flag.Int("op-reps", 5, "runs of each primitive in the measurement that prices the lower bound (the median is kept)")
	onlyModels = flag.String("models", "", "comma-separated model names to run, e.g. demo/gearbox,mnist/digits (default: all)")
	timeout    = flag.Duration("program-timeout", 10*time.Minute, "limit on one program's bench command")
	threadList = flag.String("threads", "", "comma-separated thread counts the optimised programs run with (default: 1 and GOMAXPROCS); the naive ones run with the last")
)

// repoRoot is the repository root, relative to this package.
const repoRoot = ".."

// BenchmarkModels is the benchmark: for each testdata model it builds the
// optimised and the naive program, runs their bench commands, prices the
// lower bound with primitives measured on this machine in this run, and
// prints the table (see package doc). Figures are to be read as ratios
// within this one run: the machine is shared.
func BenchmarkModels(b *testing.B) {
	ms, err := models(*onlyModels)
	if err != nil {
		b.Fatal(err)
	}
	threads, err := parseThreads(*threadList)
	if err != nil {
		b.Fatal(err)
	}
	for range b.N {
		start := time.Now()
		var rows []modelRow
		for _, m := range ms {
			row, err := benchModel(b, m, threads)
			if err != nil {
				b.Fatalf("%s: %v", m.name, err)
			}
			rows = append(rows, row)
		}
		var out bytes.Buffer
		writeTable(&out, rows, *keyBudget)
		fmt.Fprintf(&out, "\nmachine: %s/%s, %d cores (GOMAXPROCS %d); whole run %s\n", goruntime.GOOS, goruntime.GOARCH,
			goruntime.NumCPU(), goruntime.GOMAXPROCS(0), time.Since(start).Round(time.Second))
		os.Stdout.Write(out.Bytes())
		reportGeomeans(b, rows)
		for _, r := range rows {
			for _, v := range r.opt {
				if v.failed {
					b.Errorf("%s optimised on %d threads: %s", r.name, v.threads, v.skipped)
				}
			}
		}
	}
}

// model is one testdata spec.
type model struct {
	name string // e.g. "demo/gearbox"
	spec string // path from the repository root, slash-separated
}

// models lists the demo, the small models and the digit classifier, in
// that order, or the named ones among them.
func models(only string) ([]model, error) {
	small, err := filepath.Glob(filepath.Join(repoRoot, "testdata", "models", "*.yaml"))
	if err != nil {
		return nil, err
	}
	slices.Sort(small)
	paths := []string{"testdata/demo/gearbox.yaml"}
	for _, p := range small {
		rel, err := filepath.Rel(repoRoot, p)
		if err != nil {
			return nil, err
		}
		paths = append(paths, filepath.ToSlash(rel))
	}
	paths = append(paths, "testdata/mnist/digits.yaml")
	var out []model
	for _, p := range paths {
		out = append(out, model{name: strings.TrimSuffix(strings.TrimPrefix(p, "testdata/"), ".yaml"), spec: p})
	}
	if only == "" {
		return out, nil
	}
	var picked []model
	for _, name := range strings.Split(only, ",") {
		i := slices.IndexFunc(out, func(m model) bool { return m.name == strings.TrimSpace(name) })
		if i < 0 {
			return nil, fmt.Errorf("-models: no model %q", name)
		}
		picked = append(picked, out[i])
	}
	return picked, nil
}

// benchResult is what an emitted program's `bench -json` prints.
type benchResult struct {
	Model    string  `json:"model"`
	Threads  int     `json:"threads"`
	Runs     int     `json:"runs"`
	MedianMS float64 `json:"median_ms"`
	MinMS    float64 `json:"min_ms"`
	MaxMS    float64 `json:"max_ms"`
	KeysMB   float64 `json:"keys_mb"`
	PeakMB   float64 `json:"peak_mb"`
	LoadMS   float64 `json:"load_ms"`
	KeygenMS float64 `json:"keygen_ms"`
}

// variantRow is one program of a model at one thread count: measured, or
// why not.
type variantRow struct {
	variant  string // "optimised" or "naive"
	threads  int    // as asked for with -threads
	plan     *passes.Plan
	result   *benchResult // nil when not measured
	skipped  string       // why it was not measured
	failed   bool         // its bench command failed (skipped says how)
	planKeys float64      // evaluation-key MB by the plan
}

// modelRow is one model's rows of the table.
type modelRow struct {
	name     string
	opt      []variantRow  // one per thread count
	naive    variantRow    // at the last thread count
	bound    *passes.Bound // of the optimised program, priced with the measured primitives
	boundErr error
	ops      string // the measured primitives, in brief
}

func benchModel(b *testing.B, m model, threads []int) (modelRow, error) {
	row := modelRow{name: m.name}
	path := filepath.Join(repoRoot, filepath.FromSlash(m.spec))
	g, inputs, err := spec.LoadWithFiles(path)
	if err != nil {
		return row, err
	}
	sum, err := emit.InputsSHA256(os.DirFS(filepath.Dir(path)), inputs)
	if err != nil {
		return row, err
	}
	build := func(naive bool) (emit.Files, *passes.State, error) {
		return emit.Build(g, passes.Options{Naive: naive}, emit.Options{SpecPath: m.spec, InputsSHA256: sum})
	}
	optFiles, optSt, err := build(false)
	if err != nil {
		return row, fmt.Errorf("build: %w", err)
	}
	naiveFiles, naiveSt, err := build(true)
	if err != nil {
		return row, fmt.Errorf("build -naive: %w", err)
	}
	ref := passes.DefaultProfile()
	optPlan, naivePlan := passes.MakePlan(optSt, ref), passes.MakePlan(naiveSt, ref)
	for _, t := range threads {
		row.opt = append(row.opt, variantRow{variant: "optimised", threads: t, plan: optPlan, planKeys: float64(optPlan.Keys.Bytes) / 1e6})
	}
	row.naive = variantRow{variant: "naive", threads: threads[len(threads)-1], plan: naivePlan, planKeys: float64(naivePlan.Keys.Bytes) / 1e6}

	// The primitives that price the lower bound are measured at the
	// optimised program's own parameters just before and just after its
	// runs (see priceBound).
	before, measureErr := measureOps(optSt.Prog.Params)

	bin, err := buildProgram(b, optFiles, optSt.Prog.Name)
	if err != nil {
		return row, fmt.Errorf("optimised program: %w", err)
	}
	for i := range row.opt {
		if row.opt[i].result, err = runBench(bin, *runs, row.opt[i].threads); err != nil {
			row.opt[i].skipped, row.opt[i].failed = "failed: "+err.Error(), true
		}
	}
	if measureErr == nil {
		var after []runtime.OpTiming
		if after, measureErr = measureOps(optSt.Prog.Params); measureErr == nil {
			row.bound, row.ops, measureErr = priceBound(optSt.Prog, before, after)
		}
	}
	row.boundErr = measureErr
	switch {
	case row.naive.planKeys > *keyBudget:
		row.naive.skipped = fmt.Sprintf("not measured: its %d evaluation keys take %.0f MB by the plan, above the %.0f MB budget (-key-budget-mb)",
			row.naive.plan.Keys.Count, row.naive.planKeys, *keyBudget)
	default:
		n := *naiveRuns
		if row.naive.plan.EstimateMS > *slowMS {
			n = 1
		}
		bin, err := buildProgram(b, naiveFiles, naiveSt.Prog.Name)
		if err != nil {
			return row, fmt.Errorf("naive program: %w", err)
		}
		if row.naive.result, err = runBench(bin, n, row.naive.threads); err != nil {
			row.naive.skipped, row.naive.failed = "failed: "+err.Error(), true
		}
	}
	return row, nil
}

// measureOps times the primitives with lattigo at the ring degree and
// modulus chain of a program, at level 1 and at the top level (the profile
// interpolates between them: costs grow about linearly with the level).
func measureOps(pr ir.Params) ([]runtime.OpTiming, error) {
	top := len(pr.LogQ) - 1
	if top < 2 {
		return nil, fmt.Errorf("measure: top level %d; the profile needs two levels from 1 up", top)
	}
	return runtime.MeasureOps(pr.LogN, pr.LogQ, pr.LogP, []int{1, top}, *opReps)
}

// priceBound prices the lower bound of a program with the primitives
// measured before and after its runs: each primitive at each level takes
// the smaller of the two medians, the one less disturbed by whatever else
// the shared machine was doing. It also returns the top level's timings in
// brief.
func priceBound(p *ir.Program, before, after []runtime.OpTiming) (*passes.Bound, string, error) {
	if len(before) != len(after) {
		return nil, "", fmt.Errorf("measure: %d levels before the runs, %d after", len(before), len(after))
	}
	ts := make([]runtime.OpTiming, len(before))
	for i, a := range before {
		b := after[i]
		ts[i] = runtime.OpTiming{LogN: a.LogN, Level: a.Level,
			Add: min(a.Add, b.Add), MulPlain: min(a.MulPlain, b.MulPlain), MulRelin: min(a.MulRelin, b.MulRelin),
			Rescale: min(a.Rescale, b.Rescale), Rotate: min(a.Rotate, b.Rotate), Hoisted: min(a.Hoisted, b.Hoisted), Encode: min(a.Encode, b.Encode),
			RotSum: min(a.RotSum, b.RotSum), Dot: min(a.Dot, b.Dot)}
	}
	prof, err := passes.FitProfile(fmt.Sprintf("this run (logN %d)", p.Params.LogN), ts)
	if err != nil {
		return nil, "", err
	}
	bound, err := passes.LowerBound(p, prof)
	if err != nil {
		return nil, "", err
	}
	t := ts[len(ts)-1]
	brief := fmt.Sprintf("logN %d level %d: rotation %.1f ms, 4 hoisted %.1f ms, ct product+relin %.1f ms, pt product %.2f ms, rescale %.2f ms",
		p.Params.LogN, t.Level, t.Rotate/1e6, t.Hoisted/1e6, t.MulRelin/1e6, t.MulPlain/1e6, t.Rescale/1e6)
	return bound, brief, nil
}

// buildProgram writes a program into a fresh folder outside the
// repository and builds it as a user would (no workspace, module cache
// only, read-only go.mod); it returns the binary.
func buildProgram(b *testing.B, files emit.Files, name string) (string, error) {
	dir := b.TempDir()
	for _, p := range files.Paths() {
		dst := filepath.Join(dir, filepath.FromSlash(p))
		if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
			return "", err
		}
		if err := os.WriteFile(dst, files[p], 0o644); err != nil {
			return "", err
		}
	}
	bin := filepath.Join(dir, "bin", name)
	cmd := exec.Command("go", "build", "-o", bin, "./cmd/"+name)
	cmd.Dir, cmd.Env = dir, goEnv()
	if out, err := cmd.CombinedOutput(); err != nil {
		return "", fmt.Errorf("go build: %w\n%s", err, out)
	}
	return bin, nil
}

// runBench runs a program's bench command: n timed evaluations on the
// given number of threads, keys made in memory.
func runBench(bin string, n, threads int) (*benchResult, error) {
	ctx, cancel := context.WithTimeout(context.Background(), *timeout)
	defer cancel()
	var stdout, stderr bytes.Buffer
	cmd := exec.CommandContext(ctx, bin, "bench", "-json", "-n", strconv.Itoa(n), "-threads", strconv.Itoa(threads))
	cmd.Dir, cmd.Stdout, cmd.Stderr = filepath.Dir(bin), &stdout, &stderr
	name := filepath.Base(bin)
	if err := cmd.Run(); err != nil {
		return nil, fmt.Errorf("%s bench: %w: %s", name, err, lastLine(stderr.String()))
	}
	var r benchResult
	if err := json.NewDecoder(&stdout).Decode(&r); err != nil {
		return nil, fmt.Errorf("%s bench -json: %w; output:\n%s", name, err, stdout.String())
	}
	if r.Runs != n || r.MedianMS <= 0 || r.Threads != threads {
		return nil, fmt.Errorf("%s bench -json: %d runs on %d threads, median %g ms; want %d runs on %d threads and a positive median",
			name, r.Runs, r.Threads, r.MedianMS, n, threads)
	}
	return &r, nil
}

// lastLine is the last non-empty line of a command's error output: its
// message, for the table's notes.
func lastLine(s string) string {
	lines := strings.Split(strings.TrimSpace(s), "\n")
	return strings.TrimSpace(lines[len(lines)-1])
}

// parseThreads reads -threads: a list of thread counts, each at least 1;
// empty means 1 and GOMAXPROCS.
func parseThreads(s string) ([]int, error) {
	if s == "" {
		return slices.Compact([]int{1, goruntime.GOMAXPROCS(0)}), nil
	}
	var out []int
	for _, f := range strings.Split(s, ",") {
		t, err := strconv.Atoi(strings.TrimSpace(f))
		if err != nil || t < 1 {
			return nil, fmt.Errorf("-threads %q: want thread counts of at least 1, comma-separated", s)
		}
		out = append(out, t)
	}
	return out, nil
}

// goEnv is the environment of a user's go command: this one's without Go
// settings (a CI job's GOFLAGS or GOWORK must not leak in) except where
// the caches are, then no workspace, no toolchain download, read-only
// module files.
func goEnv() []string {
	var env []string
	for _, kv := range os.Environ() {
		k, _, _ := strings.Cut(kv, "=")
		if (strings.HasPrefix(k, "GO") || strings.HasPrefix(k, "CGO_")) &&
			k != "GOCACHE" && k != "GOMODCACHE" && k != "GOPATH" && k != "GOROOT" && k != "GOPROXY" {
			continue
		}
		env = append(env, kv)
	}
	return append(env, "GOWORK=off", "GOTOOLCHAIN=local", "GOFLAGS=-mod=readonly")
}

// reportGeomeans reports the geometric means of the ratios over the models
// where both sides were measured, at the last thread count, for benchstat.
func reportGeomeans(b *testing.B, rows []modelRow) {
	var vsNaive, vsBound []float64
	for _, r := range rows {
		o := r.opt[len(r.opt)-1] // at the naive program's thread count
		if o.result != nil && r.naive.result != nil {
			vsNaive = append(vsNaive, o.result.MedianMS/r.naive.result.MedianMS)
		}
		if o.result != nil && r.bound != nil {
			vsBound = append(vsBound, o.result.MedianMS/boundMS(r.bound, o.threads))
		}
	}
	if len(vsNaive) > 0 {
		b.ReportMetric(geomean(vsNaive), "opt/naive")
	}
	if len(vsBound) > 0 {
		b.ReportMetric(geomean(vsBound), "opt/bound")
	}
}

func geomean(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += math.Log(x)
	}
	return math.Exp(s / float64(len(v)))
}

// boundMS is the lower bound at a thread count: the work priced at one
// thread divided by the threads (perfect parallelism).
func boundMS(b *passes.Bound, threads int) float64 { return b.MS / float64(max(threads, 1)) }
