package main

import (
	"bytes"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"github.com/lanthorn/lanthorn/emit"
	"github.com/lanthorn/lanthorn/passes"
	"github.com/lanthorn/lanthorn/spec"
)

func version() string { return emit.Version }

func runBuild(args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("build", flag.ContinueOnError)
	out := fs.String("o", "", "output `directory` (created if missing)")
	module := fs.String("module", "", "module `path` of the emitted program (default: the model name)")
	dump := fs.String("dump-after", "", "comma-separated `passes` whose IR is printed to stderr")
	fs.Usage = func() {
		fmt.Fprintf(stderr, "Usage: lanthorn build SPEC -o DIR [flags]\n\nWrites the Go program that evaluates SPEC's model on encrypted inputs.\n\nFlags:\n")
		fs.PrintDefaults()
	}
	pos, err := parseFlags(fs, args, stderr)
	if err != nil {
		return err
	}
	if len(pos) != 1 || *out == "" {
		fs.Usage()
		return errUsage
	}
	var popts passes.Options
	if *dump != "" {
		popts.DumpAfter = strings.Split(*dump, ",")
	}
	files, st, err := buildSpec(pos[0], popts, emit.Options{Module: *module, SpecPath: filepath.ToSlash(pos[0])})
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
	written, err := writeFiles(*out, files)
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "wrote %s: %d files (%d changed)\n", *out, len(files), written)
	return nil
}

// buildSpec loads a spec from disk and generates its program.
func buildSpec(path string, popts passes.Options, opts emit.Options) (emit.Files, *passes.State, error) {
	g, err := spec.Load(path)
	if err != nil {
		return nil, nil, err
	}
	return emit.Build(g, popts, opts)
}

// writeFiles writes the program into dir: each changed file to a temporary
// sibling, then renamed into place; unchanged files are left untouched.
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
