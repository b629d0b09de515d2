package main

import (
	"fmt"
	"strings"
)

// A small line diff for check's reports, in the unified format of diff -u
// (GNU diffutils): hunks of changed lines with three lines of context. The
// edit script is Myers' O(ND) greedy algorithm ("An O(ND) difference
// algorithm and its variations", Algorithmica 1, 1986) on the lines left
// after trimming the common prefix and suffix. Past maxEditDistance edits it
// gives up on a minimal script and reports the differing middle as removed
// then added: still a correct diff, only a longer one, and check cuts
// its reports short anyway.

// maxEditDistance bounds Myers' search: O(D²) memory and O((N+M)·D) time.
const maxEditDistance = 500

// edit is one line of an edit script: ' ' kept, '-' removed, '+' added.
type edit struct {
	op   byte
	line string // with its newline, if it had one
}

// splitLines splits s after each newline; a last line without one is kept.
func splitLines(s string) []string {
	if s == "" {
		return nil
	}
	lines := strings.SplitAfter(s, "\n")
	if lines[len(lines)-1] == "" {
		lines = lines[:len(lines)-1]
	}
	return lines
}

// diffLines returns an edit script that turns a into b.
func diffLines(a, b []string) []edit {
	pre := 0
	for pre < len(a) && pre < len(b) && a[pre] == b[pre] {
		pre++
	}
	suf := 0
	for suf < len(a)-pre && suf < len(b)-pre && a[len(a)-1-suf] == b[len(b)-1-suf] {
		suf++
	}
	var out []edit
	for _, l := range a[:pre] {
		out = append(out, edit{' ', l})
	}
	out = append(out, myers(a[pre:len(a)-suf], b[pre:len(b)-suf])...)
	for _, l := range a[len(a)-suf:] {
		out = append(out, edit{' ', l})
	}
	return out
}

// myers is the greedy forward search for the shortest edit script, keeping
// each round's furthest-reaching paths to walk the script back.
func myers(a, b []string) []edit {
	n, m := len(a), len(b)
	if n == 0 || m == 0 {
		return replaceAll(a, b)
	}
	limit := min(n+m, maxEditDistance)
	off := limit + 1
	v := make([]int, 2*limit+3) // v[off+k]: furthest x on diagonal k = x - y
	var trace [][]int
	found := -1
	for d := 0; d <= limit && found < 0; d++ {
		trace = append(trace, append([]int(nil), v...))
		for k := -d; k <= d; k += 2 {
			var x int
			if k == -d || k != d && v[off+k-1] < v[off+k+1] {
				x = v[off+k+1] // down: an insertion from b
			} else {
				x = v[off+k-1] + 1 // right: a deletion from a
			}
			y := x - k
			for x < n && y < m && a[x] == b[y] {
				x, y = x+1, y+1
			}
			v[off+k] = x
			if x >= n && y >= m {
				found = d
				break
			}
		}
	}
	if found < 0 {
		return replaceAll(a, b)
	}
	// Walk back from (n, m); trace[d] holds v as it was before round d.
	var rev []edit
	x, y := n, m
	for d := found; d > 0; d-- {
		vp := trace[d]
		k := x - y
		var pk int
		if k == -d || k != d && vp[off+k-1] < vp[off+k+1] {
			pk = k + 1
		} else {
			pk = k - 1
		}
		px := vp[off+pk]
		py := px - pk
		for x > px && y > py {
			x, y = x-1, y-1
			rev = append(rev, edit{' ', a[x]})
		}
		if pk == k+1 {
			y--
			rev = append(rev, edit{'+', b[y]})
		} else {
			x--
			rev = append(rev, edit{'-', a[x]})
		}
	}
	for x > 0 && y > 0 {
		x, y = x-1, y-1
		rev = append(rev, edit{' ', a[x]})
	}
	out := make([]edit, len(rev))
	for i, e := range rev {
		out[len(rev)-1-i] = e
	}
	return out
}

func replaceAll(a, b []string) []edit {
	out := make([]edit, 0, len(a)+len(b))
	for _, l := range a {
		out = append(out, edit{'-', l})
	}
	for _, l := range b {
		out = append(out, edit{'+', l})
	}
	return out
}

// unifiedDiff formats the edit script from a to b as diff -u does, with
// the given file labels and lines of context; "" when a equals b.
func unifiedDiff(labelA, labelB, a, b string, context int) string {
	if a == b {
		return ""
	}
	edits := diffLines(splitLines(a), splitLines(b))
	var sb strings.Builder
	fmt.Fprintf(&sb, "--- %s\n+++ %s\n", labelA, labelB)
	// lineA[i], lineB[i]: 1-based line numbers in a and b before edits[i].
	lineA, lineB := make([]int, len(edits)+1), make([]int, len(edits)+1)
	lineA[0], lineB[0] = 1, 1
	for i, e := range edits {
		lineA[i+1], lineB[i+1] = lineA[i], lineB[i]
		if e.op != '+' {
			lineA[i+1]++
		}
		if e.op != '-' {
			lineB[i+1]++
		}
	}
	for i := 0; i < len(edits); {
		if edits[i].op == ' ' {
			i++
			continue
		}
		// A hunk: from context lines before the first change to context
		// lines after the last change that is at most 2·context away.
		start := max(0, i-context)
		end := i
		for j := i; j < len(edits); j++ {
			if edits[j].op != ' ' {
				end = j + 1
			} else if j-end >= 2*context {
				break
			}
		}
		end = min(len(edits), end+context)
		countA, countB := lineA[end]-lineA[start], lineB[end]-lineB[start]
		fmt.Fprintf(&sb, "@@ -%s +%s @@\n", hunkRange(lineA[start], countA), hunkRange(lineB[start], countB))
		for _, e := range edits[start:end] {
			sb.WriteByte(e.op)
			sb.WriteString(e.line)
			if !strings.HasSuffix(e.line, "\n") {
				sb.WriteString("\n\\ No newline at end of file\n")
			}
		}
		i = end
	}
	return sb.String()
}

// hunkRange prints a hunk's line range as diff -u does: "l,n", "l" when n
// is 1, and the line before the hunk when n is 0.
func hunkRange(line, n int) string {
	switch n {
	case 0:
		return fmt.Sprintf("%d,0", line-1)
	case 1:
		return fmt.Sprintf("%d", line)
	}
	return fmt.Sprintf("%d,%d", line, n)
}

// truncateLines keeps the first n lines of s and says how many it dropped.
func truncateLines(s string, n int) string {
	lines := splitLines(s)
	if len(lines) <= n {
		return s
	}
	return strings.Join(lines[:n], "") + fmt.Sprintf("… %d more lines of diff\n", len(lines)-n)
}
