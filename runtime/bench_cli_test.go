package runtime

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

func TestCLIBenchJSON(t *testing.T) {
	info := toyInfo(t, "cli-bench")
	r := runToy(t, info, t.TempDir(), "bench", "-n", "3", "-threads", "2", "-json")
	require.Zero(t, r.code, r.stderr)
	// Exactly these fields, which benchmark harnesses parse.
	var fields map[string]any
	require.NoError(t, json.Unmarshal([]byte(r.stdout), &fields))
	var names []string
	for k := range fields {
		names = append(names, k)
	}
	slices.Sort(names)
	require.Equal(t, []string{"keygen_ms", "keys_mb", "load_ms", "max_ms", "median_ms", "min_ms", "model", "peak_mb", "runs", "threads"}, names)
	var res BenchResult
	dec := json.NewDecoder(strings.NewReader(r.stdout))
	dec.DisallowUnknownFields()
	require.NoError(t, dec.Decode(&res))
	require.False(t, dec.More(), "one object only")
	require.Equal(t, "toy", res.Model)
	require.Equal(t, 2, res.Threads)
	require.Equal(t, 3, res.Runs)
	require.True(t, 0 < res.MinMS && res.MinMS <= res.MedianMS && res.MedianMS <= res.MaxMS, "%+v", res)
	require.GreaterOrEqual(t, res.KeysMB, 0.0) // the toy needs no evaluation key
	require.Positive(t, res.PeakMB)
	require.Positive(t, res.KeygenMS)
	require.GreaterOrEqual(t, res.LoadMS, 0.0)
	require.Equal(t, "\n", r.stdout[len(r.stdout)-1:])
}

func TestCLIBenchText(t *testing.T) {
	info := toyInfo(t, "cli-bench")
	dir := toyFiles(t, info)
	r := runToy(t, info, dir, "bench", "-n", "2", "-threads", "1", "-keys", "keys")
	require.Zero(t, r.code, r.stderr)
	for _, want := range []string{
		"toy bench: 2 runs after 1 warm-up, 1 thread (GOMAXPROCS",
		"latency of one encrypted evaluation: ",
		"evaluation keys:", "read from keys in",
		"weight encoding (Load):",
		"peak memory:",
		"warm-up result vs float64 model:     max abs error",
	} {
		require.Contains(t, r.stdout, want)
	}
}

func TestCLIBenchRefusals(t *testing.T) {
	info := toyInfo(t, "cli-bench")
	dir := t.TempDir()
	require.NoError(t, os.WriteFile(filepath.Join(dir, "file"), nil, 0o644))
	cases := []struct {
		args []string
		code int
		want string
	}{
		{[]string{"-n", "0"}, 2, "-n 0: want 1..100000 runs"},
		{[]string{"-threads", "0"}, 2, "-threads 0: want 1..256"},
		{[]string{"-threads", "257"}, 2, "-threads 257: want 1..256"},
		{[]string{"-keys", "missing"}, 1, "missing: no such file or directory"},
		{[]string{"-keys", "file"}, 1, "-keys file: not a folder"},
		{[]string{"extra"}, 2, `unexpected argument "extra"`},
	}
	for _, c := range cases {
		r := runToy(t, info, dir, append([]string{"bench"}, c.args...)...)
		require.Equal(t, c.code, r.code, "%v: %s", c.args, r.stderr)
		require.Contains(t, r.stderr, c.want, "%v", c.args)
	}
	// eval and selftest check -threads the same way.
	for _, cmd := range [][]string{{"eval", "-keys", "k", "-in", "x", "-out", "y", "-threads", "-1"}, {"selftest", "-threads", "0"}} {
		r := runToy(t, info, dir, cmd...)
		require.Equal(t, 2, r.code, "%v: %s", cmd, r.stderr)
		require.Contains(t, r.stderr, "want 1..256", "%v", cmd)
	}
}

// eval writes the same result file for any number of threads, and says
// how many it used; selftest too.
func TestCLIThreads(t *testing.T) {
	info := toyInfo(t, "cli-threads")
	dir := toyFiles(t, info)
	var want []byte
	for _, n := range []string{"1", "2", "3"} {
		out := "y" + n + ".ct"
		r := runToy(t, info, dir, "eval", "-keys", "keys/eval", "-in", "x.ct", "-out", out, "-threads", n)
		require.Zero(t, r.code, r.stderr)
		say := "on " + n + " threads"
		if n == "1" {
			say = "on 1 thread "
		}
		require.Contains(t, r.stderr, say)
		got, err := os.ReadFile(filepath.Join(dir, out))
		require.NoError(t, err)
		if want == nil {
			want = got
		}
		require.True(t, bytes.Equal(want, got), "threads %s: result file differs from one thread's", n)
	}
	r := runToy(t, info, dir, "selftest", "-n", "2", "-threads", "2")
	require.Zero(t, r.code, r.stderr)
	require.Contains(t, r.stdout, "median of 2 on 2 threads")
	r = runToy(t, info, dir, "help")
	require.Contains(t, r.stdout, "  bench     measure the latency")
}

func TestPeakMemory(t *testing.T) {
	// The resident size is read first: it may grow between two reads, and
	// the high-water mark read after it is at least what it was.
	rss, rssErr := procStatusKB("VmRSS")
	peak, how := peakMemory()
	require.Positive(t, peak)
	require.NotEmpty(t, how)
	if _, err := os.Stat("/proc/self/status"); err == nil {
		// Linux: the kernel's figure (proc(5): VmHWM, peak resident set size).
		require.Equal(t, "VmHWM from /proc/self/status", how)
		require.NoError(t, rssErr)
		require.GreaterOrEqual(t, peak, rss*1024, "the peak is at least the resident size read before it")
	}
	_, err := procStatusKB("NoSuchField")
	require.Error(t, err)
}
