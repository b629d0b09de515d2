package main

import (
	"bytes"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/lanthorn/lanthorn/emit"
	"github.com/lanthorn/lanthorn/passes"
	"github.com/lanthorn/lanthorn/spec"
)

func version() string { return emit.Version }

// programFlags are the flags that decide what build writes; check takes the
// same ones, so that it compares with exactly what build would write.
type programFlags struct {
	out    *string
	module *string
	naive  *bool
	// objective is what the selection minimises (objective.go).
	objective *string
	// maxKeysMB bounds the evaluation keys (keybudget.go).
	maxKeysMB *float64
	// chunk caps the values of one ciphertext (chunk.go).
	chunk *int
}

func addProgramFlags(fs *flag.FlagSet) programFlags {
	return programFlags{
		out:    fs.String("o", "", "output `directory` (created if missing)"),
		module: fs.String("module", "", "module `path` of the emitted program (default: the model name)"),
		naive: fs.Bool("naive", false, "lower without the ciphertext-level optimisations (one rotation per diagonal, a rescale\n"+
			"after every product, eager relinearization): the benchmark's yardstick, not for deployment"),
		objective: objectiveFlag(fs),
		maxKeysMB: keyBudgetFlag(fs),
		chunk:     chunkFlag(fs),
	}
}

func runBuild(args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("build", flag.ContinueOnError)
	pf := addProgramFlags(fs)
	dump := fs.String("dump-after", "", "comma-separated `passes` whose IR is printed to stderr")
	fs.Usage = func() {
		fmt.Fprintf(stderr, "Usage: lanthorn build SPEC -o DIR [flags]\n\n"+
			"Writes the Go program that evaluates SPEC's model on encrypted inputs.\n"+
			"Files whose content is unchanged are left untouched; files that an earlier\n"+
			"build wrote (they start with lanthorn's generated-code header) and that\n"+
			"this build no longer writes are removed. Nothing else in DIR is touched.\n\nFlags:\n")
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
		return err
	}
	popts := passes.Options{Naive: *pf.naive, Objective: obj}
	if popts.MaxKeyBytes, err = keyBudgetBytes(*pf.maxKeysMB); err != nil {
		return err
	}
	if popts.ChunkSlots, err = chunkSlots(*pf.chunk); err != nil {
		return err
	}
	if *dump != "" {
		popts.DumpAfter = strings.Split(*dump, ",")
	}
	files, st, err := generate(pos[0], *pf.out, *pf.module, popts)
	if st != nil {
		for _, name := range popts.DumpAfter {
			if d, ok := st.Report.Dumps[name]; ok {
				fmt.Fprintf(stderr, "# after %s\n%s", name, d)
			}
		}
	}
	if err != nil {
		return err
	}
	changed, err := writeFiles(*pf.out, files)
	if err != nil {
		return err
	}
	removed, kept, err := removeStale(*pf.out, files)
	if err != nil {
		return err
	}
	summary := fmt.Sprintf("%d changed", changed)
	if len(removed) > 0 {
		summary += fmt.Sprintf(", %d removed: %s", len(removed), strings.Join(removed, ", "))
	}
	fmt.Fprintf(stdout, "wrote %s: %d files (%s)\n", *pf.out, len(files), summary)
	for _, p := range kept {
		fmt.Fprintf(stderr, "lanthorn build: warning: %s is not part of this program but has no lanthorn header, so it was left in place; remove it if lanthorn put it there\n", p)
	}
	return nil
}

// generate loads a spec from disk and generates its program for the output
// folder out, as build writes it and check compares it. The result depends
// on the spec's and weights' contents, the spec's file name, out's path
// relative to the spec's folder (named in the regenerate line) and the flags,
// never on the working directory, absolute paths or the environment.
func generate(specPath, out, module string, popts passes.Options) (emit.Files, *passes.State, error) {
	g, inputs, err := spec.LoadWithFiles(specPath)
	if err != nil {
		return nil, nil, err
	}
	sum, err := emit.InputsSHA256(os.DirFS(filepath.Dir(specPath)), inputs)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: hash the inputs: %w", specPath, err)
	}
	return emit.Build(g, popts, emit.Options{
		Module:       module,
		SpecPath:     path.Base(filepath.ToSlash(specPath)),
		OutDir:       regenOutDir(specPath, out),
		Flags:        regenFlags(module, popts),
		InputsSHA256: sum,
	})
}

// regenFlags are the flags that change what build writes, as the
// regenerate line repeats them: the same program comes out of that line.
func regenFlags(module string, popts passes.Options) []string {
	var f []string
	if module != "" {
		f = append(f, "-module", module)
	}
	if popts.Objective != passes.Latency {
		f = append(f, "-objective", popts.Objective.String())
	}
	if popts.MaxKeyBytes > 0 {
		f = append(f, "-max-keys-mb", strconv.FormatFloat(float64(popts.MaxKeyBytes)/1e6, 'g', -1, 64))
	}
	if popts.ChunkSlots > 0 {
		f = append(f, "-chunk-slots", strconv.Itoa(popts.ChunkSlots))
	}
	if popts.Naive {
		f = append(f, "-naive")
	}
	return f
}

// regenOutDir names the output folder in the regenerate line: relative to
// the spec's folder, where that line's command runs with the spec's base
// name. Relative paths keep machine details out of the program; where there
// is none (another volume), the line says <dir>.
func regenOutDir(specPath, out string) string {
	specDir, err1 := filepath.Abs(filepath.Dir(specPath))
	outDir, err2 := filepath.Abs(out)
	if err := errors.Join(err1, err2); err != nil {
		return "<dir>"
	}
	rel, err := filepath.Rel(specDir, outDir)
	if err != nil {
		return "<dir>"
	}
	return filepath.ToSlash(rel)
}

// writeFiles writes the program into dir: each changed file to a temporary
// sibling, then renamed into place, so that a reader (an editor, a running
// go build) never sees half a file; unchanged files are left untouched, so
// their modification times stay and incremental builds stay quiet.
func writeFiles(dir string, files emit.Files) (changed int, err error) {
	for _, name := range files.Paths() {
		dst := filepath.Join(dir, filepath.FromSlash(name))
		if old, err := os.ReadFile(dst); err == nil && bytes.Equal(old, files[name]) {
			continue
		} else if err != nil && !errors.Is(err, os.ErrNotExist) {
			return changed, err
		}
		if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
			return changed, err
		}
		tmp, err := os.CreateTemp(filepath.Dir(dst), "."+filepath.Base(dst)+".tmp*")
		if err != nil {
			return changed, err
		}
		_, werr := tmp.Write(files[name])
		cerr := tmp.Close()
		if err := errors.Join(werr, cerr); err != nil {
			os.Remove(tmp.Name())
			return changed, err
		}
		if err := os.Chmod(tmp.Name(), 0o644); err != nil {
			os.Remove(tmp.Name())
			return changed, err
		}
		if err := os.Rename(tmp.Name(), dst); err != nil {
			os.Remove(tmp.Name())
			return changed, err
		}
		changed++
	}
	return changed, nil
}

// removeStale deletes the files under dir that carry lanthorn's header but
// that files does not hold (a previous build wrote them: a renamed model's
// command, a temporary file left by an interrupted build), then the folders
// that this left empty. It returns the removed paths and the extra runtime
// files it left in place because they carry no header.
func removeStale(dir string, files emit.Files) (removed, kept []string, err error) {
	extra, err := extraFiles(dir, files)
	if err != nil {
		return nil, nil, err
	}
	for _, x := range extra {
		if !x.generated {
			kept = append(kept, x.path)
			continue
		}
		p := filepath.Join(dir, filepath.FromSlash(x.path))
		if err := os.Remove(p); err != nil {
			return removed, kept, err
		}
		removed = append(removed, x.path)
		// Remove the folders this emptied, up to (not including) dir.
		for d := path.Dir(x.path); d != "."; d = path.Dir(d) {
			if os.Remove(filepath.Join(dir, filepath.FromSlash(d))) != nil {
				break // not empty, or not ours to judge
			}
		}
	}
	return removed, kept, nil
}
