package main

import (
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// The expected hunks are what GNU diffutils 3.8 prints for `diff -u A B`
// (the two label lines left out), run on the same inputs.
func TestUnifiedDiffMatchesGNUDiff(t *testing.T) {
	abc := "a\nb\nc\nd\ne\nf\ng\nh\ni\nj\nk\nl\nm\n"
	tests := []struct {
		name string
		a, b string
		want string
	}{
		{"equal", abc, abc, ""},
		{"two hunks and a missing final newline", abc, "a\nB\nc\nd\ne\nf\ng\nh\ni\nj\nK\nl\nm\nn",
			"@@ -1,5 +1,5 @@\n a\n-b\n+B\n c\n d\n e\n" +
				"@@ -8,6 +8,7 @@\n h\n i\n j\n-k\n+K\n l\n m\n+n\n\\ No newline at end of file\n"},
		{"changes six lines apart share a hunk", abc, "a\nB\nc\nd\ne\nf\ng\nh\nI\nj\nk\nl\nm\n",
			"@@ -1,12 +1,12 @@\n a\n-b\n+B\n c\n d\n e\n f\n g\n h\n-i\n+I\n j\n k\n l\n"},
		{"removed file", "x\n", "", "@@ -1 +0,0 @@\n-x\n"},
		{"new file", "", "x\n", "@@ -0,0 +1 @@\n+x\n"},
		{"insertion at the top", "b\nc\n", "a\nb\nc\n", "@@ -1,2 +1,3 @@\n+a\n b\n c\n"},
		{"deletion in the middle", "a\nb\nc\nd\ne\nf\ng\nh\n", "a\nb\nc\nd\nf\ng\nh\n",
			"@@ -2,7 +2,6 @@\n b\n c\n d\n-e\n f\n g\n h\n"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := unifiedDiff("A", "B", tt.a, tt.b, 3)
			if tt.want == "" {
				require.Empty(t, got)
				return
			}
			require.Equal(t, "--- A\n+++ B\n"+tt.want, got)
		})
	}
}

// On random files, GNU patch turns A into B with our diff, and our diff
// changes as few lines as GNU diff's --minimal one: the script is correct
// and shortest. Skipped where either tool is missing.
func TestUnifiedDiffAppliesWithPatch(t *testing.T) {
	for _, tool := range []string{"diff", "patch"} {
		if _, err := exec.LookPath(tool); err != nil {
			t.Skipf("%s (GNU) not installed", tool)
		}
	}
	r := rand.New(rand.NewPCG(5, 7))
	dir := t.TempDir()
	randomFile := func() string {
		var lines []string
		for range r.IntN(30) {
			lines = append(lines, string(rune('a'+r.IntN(4))))
		}
		s := strings.Join(lines, "\n")
		if s != "" && r.IntN(4) > 0 {
			s += "\n"
		}
		return s
	}
	for i := range 40 {
		a, b := randomFile(), randomFile()
		d := unifiedDiff("A", "B", a, b, 3)
		if a == b {
			require.Empty(t, d)
			continue
		}
		pa, pb := filepath.Join(dir, "A"), filepath.Join(dir, "B")
		require.NoError(t, os.WriteFile(pa, []byte(a), 0o644))
		require.NoError(t, os.WriteFile(pb, []byte(b), 0o644))
		cmd := exec.Command("patch", "-s", "-o", "-", pa)
		cmd.Stdin = strings.NewReader(d)
		out, err := cmd.Output()
		require.NoError(t, err, "case %d: patch rejects\n%s", i, d)
		require.Equal(t, b, string(out), "case %d:\n%s", i, d)
		gnu, _ := exec.Command("diff", "--minimal", "-u", pa, pb).Output()
		require.Equal(t, changedLines(string(gnu)), changedLines(d), "case %d: ours\n%s\nGNU\n%s", i, d, gnu)
	}
}

func changedLines(d string) int {
	n := 0
	for _, l := range strings.Split(d, "\n") {
		if (strings.HasPrefix(l, "-") && !strings.HasPrefix(l, "--- ")) || (strings.HasPrefix(l, "+") && !strings.HasPrefix(l, "+++ ")) {
			n++
		}
	}
	return n
}

// Past maxEditDistance the diff stays correct (every old line removed,
// every new one added) instead of growing without bound.
func TestDiffLinesBounded(t *testing.T) {
	var a, b []string
	for i := range 3 * maxEditDistance {
		a = append(a, string(rune('a'+i%7))+"\n")
		b = append(b, string(rune('a'+i%5))+"\n")
	}
	edits := diffLines(a, b)
	var gotA, gotB []string
	for _, e := range edits {
		if e.op != '+' {
			gotA = append(gotA, e.line)
		}
		if e.op != '-' {
			gotB = append(gotB, e.line)
		}
	}
	require.Equal(t, a, gotA)
	require.Equal(t, b, gotB)
}

func TestTruncateLines(t *testing.T) {
	require.Equal(t, "a\nb\n", truncateLines("a\nb\n", 2))
	require.Equal(t, "a\n… 2 more lines of diff\n", truncateLines("a\nb\nc\n", 1))
}
