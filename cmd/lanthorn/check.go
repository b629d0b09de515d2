package main

import (
	"bytes"
	"crypto/sha256"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"unicode/utf8"

	"github.com/lanthorn/lanthorn/emit"
	"github.com/lanthorn/lanthorn/passes"
)

// How long check's report may get: each file's diff is cut after
// maxDiffLines lines, and files past the first maxDiffFiles are only named.
// A file that is missing or extra shows only its first maxWholeFileLines.
const (
	maxDiffLines      = 40
	maxWholeFileLines = 8
	maxDiffFiles      = 10
	diffContext       = 3
)

func runCheck(args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("check", flag.ContinueOnError)
	pf := addProgramFlags(fs)
	fs.Lookup("o").Usage = "program `directory` to check"
	fs.Usage = func() {
		fmt.Fprintf(stderr, "Usage: lanthorn check SPEC -o DIR [flags]\n\n"+
			"Checks that DIR holds exactly what lanthorn build SPEC -o DIR would write,\n"+
			"for CI jobs that keep generated code honest. Writes nothing. Exit status:\n"+
			"0 up to date; 1 stale, with each stale, missing or extra file listed with a\n"+
			"short unified diff; 2 on an error (a bad spec, an unreadable file).\n"+
			"Extra files are those that start with lanthorn's generated-code header and\n"+
			"any file under internal/runtime that build does not write; nothing else\n"+
			"in DIR (bin/, keys/, *.ct, your own files) is reported.\n\n"+
			"Pass the same -module as to build.\n\nFlags:\n")
		fs.PrintDefaults()
	}
	pos, err := parseFlags(fs, args, stderr)
	if err != nil {
		return err
	}
	if len(pos) != 1 || *pf.out == "" {
		fs.Usage()
		return errUsage
	}
	obj, err := parseObjective(*pf.objective)
	if err != nil {
		return &exitError{code: 2, err: err}
	}
	budget, err := keyBudgetBytes(*pf.maxKeysMB)
	if err != nil {
		return &exitError{code: 2, err: err}
	}
	chunk, err := chunkSlots(*pf.chunk)
	if err != nil {
		return &exitError{code: 2, err: err}
	}
	files, _, err := generate(pos[0], *pf.out, *pf.module, passes.Options{Naive: *pf.naive, Objective: obj, MaxKeyBytes: budget, ChunkSlots: chunk})
	if err != nil {
		return &exitError{code: 2, err: err}
	}
	diffs, err := compareDir(*pf.out, files)
	if err != nil {
		return &exitError{code: 2, err: err}
	}
	cmd := fmt.Sprintf("lanthorn build %s -o %s", pos[0], *pf.out)
	if *pf.module != "" {
		cmd += " -module " + *pf.module
	}
	if *pf.naive {
		cmd += " -naive"
	}
	if obj != passes.Latency {
		cmd += " -objective " + obj.String()
	}
	if budget > 0 {
		cmd += fmt.Sprintf(" -max-keys-mb %g", *pf.maxKeysMB)
	}
	if chunk > 0 {
		cmd += fmt.Sprintf(" -chunk-slots %d", chunk)
	}
	if len(diffs) == 0 {
		fmt.Fprintf(stdout, "%s is up to date: its %d files are what %s writes\n", *pf.out, len(files), cmd)
		return nil
	}
	if writeReport(stdout, *pf.out, diffs) {
		fmt.Fprintf(stdout, "Run %s to update it.\n", cmd)
	}
	return &exitError{code: 1}
}

// fileDiff is one file where the folder and the generator disagree.
type fileDiff struct {
	path     string // slash-separated, relative to the folder
	kind     string // "stale", "missing" or "extra"
	old, new []byte // on disk, and as build writes it (nil when absent)
	removes  bool   // extra and carrying the header: the next build deletes it
}

// compareDir compares the folder dir with the generated files.
func compareDir(dir string, files emit.Files) ([]fileDiff, error) {
	var out []fileDiff
	for _, name := range files.Paths() {
		old, err := os.ReadFile(filepath.Join(dir, filepath.FromSlash(name)))
		switch {
		case errors.Is(err, os.ErrNotExist):
			out = append(out, fileDiff{path: name, kind: "missing", new: files[name]})
		case err != nil:
			return nil, err
		case !bytes.Equal(old, files[name]):
			out = append(out, fileDiff{path: name, kind: "stale", old: old, new: files[name]})
		}
	}
	extra, err := extraFiles(dir, files)
	if err != nil {
		return nil, err
	}
	for _, x := range extra {
		old, err := os.ReadFile(filepath.Join(dir, filepath.FromSlash(x.path)))
		if err != nil {
			return nil, err
		}
		out = append(out, fileDiff{path: x.path, kind: "extra", old: old, removes: x.generated})
	}
	sort.Slice(out, func(i, j int) bool { return out[i].path < out[j].path })
	return out, nil
}

// writeReport lists each differing file with a bounded unified diff. It
// reports whether a build would fix any of them.
func writeReport(w io.Writer, dir string, diffs []fileDiff) (buildFixes bool) {
	count := map[string]int{}
	for _, d := range diffs {
		count[d.kind]++
	}
	var parts []string
	for _, k := range []string{"stale", "missing", "extra"} {
		if count[k] > 0 {
			parts = append(parts, fmt.Sprintf("%d %s", count[k], k))
		}
	}
	fmt.Fprintf(w, "%s is stale: %s\n", dir, strings.Join(parts, ", "))
	for i, d := range diffs {
		note := ""
		if d.kind == "extra" {
			if d.removes {
				note = " (it has lanthorn's header; build removes it)"
			} else {
				note = " (build does not write it and leaves it in place: remove it)"
			}
		}
		buildFixes = buildFixes || d.kind != "extra" || d.removes
		fmt.Fprintf(w, "%-7s %s%s\n", d.kind, d.path, note)
		if i < maxDiffFiles {
			fmt.Fprint(w, fileDiffText(dir, d))
		}
	}
	if len(diffs) > maxDiffFiles {
		fmt.Fprintf(w, "(diffs of the last %d files left out)\n", len(diffs)-maxDiffFiles)
	}
	return buildFixes
}

// fileDiffText is the diff of one file: unified for text, a summary for
// binary content such as weights.bin.
func fileDiffText(dir string, d fileDiff) string {
	labelOld, labelNew := filepath.ToSlash(filepath.Join(dir, d.path)), d.path+" (as lanthorn build writes it)"
	if d.old == nil {
		labelOld = "/dev/null"
	}
	if d.new == nil {
		labelNew = "/dev/null"
	}
	if isBinary(d.old) || isBinary(d.new) {
		return fmt.Sprintf("binary content differs: %s → %s\n", describeBytes(d.old), describeBytes(d.new))
	}
	limit := maxDiffLines
	if d.old == nil || d.new == nil {
		limit = maxWholeFileLines + 3 // and the three label lines
	}
	return truncateLines(unifiedDiff(labelOld, labelNew, string(d.old), string(d.new), diffContext), limit)
}

func isBinary(b []byte) bool {
	return bytes.IndexByte(b, 0) >= 0 || !utf8.Valid(b)
}

func describeBytes(b []byte) string {
	if b == nil {
		return "none"
	}
	return fmt.Sprintf("%d bytes, SHA-256 %x", len(b), sha256.Sum256(b))
}
