package main

import (
	"flag"
	"fmt"
	"io"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"

	"github.com/lanthorn/lanthorn/emit"
	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/passes"
	"github.com/lanthorn/lanthorn/spec"
	"github.com/lanthorn/lanthorn/testdata/demo"
)

func runDemo(args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("demo", flag.ContinueOnError)
	keep := fs.String("o", "", "write the demo program into `directory` and keep it (default: a temporary folder, removed after)")
	fs.Usage = func() {
		fmt.Fprintf(stderr, "Usage: lanthorn demo [-o DIR]\n\n"+
			"Builds the embedded demo (a gearbox failure-risk model over vibration\n"+
			"features, trained on invented data) into a folder, compiles it with go build\n"+
			"as a standalone module, runs its self-test and prints the precision and the\n"+
			"time of one encrypted evaluation.\n\nFlags:\n")
		fs.PrintDefaults()
	}
	if _, err := parseFlags(fs, args, stderr); err != nil {
		return err
	}
	g, err := loadDemo()
	if err != nil {
		return err
	}
	sum, err := demoInputsSHA256()
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	files, _, err := emit.Build(g, passes.Options{}, emit.Options{SpecPath: "testdata/demo/" + demo.Spec, InputsSHA256: sum})
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	dir := *keep
	if dir == "" {
		dir, err = os.MkdirTemp("", "lanthorn-demo-")
		if err != nil {
			return err
		}
		defer os.RemoveAll(dir)
	}
	if _, err := writeFiles(dir, files); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "lanthorn demo: wrote the %s program (%d files) to %s\n", g.Name, len(files), dir)
	bin := filepath.Join(dir, "bin", g.Name)
	fmt.Fprintf(stdout, "lanthorn demo: go build ./cmd/%s (a standalone module; the first build fetches lattigo)\n", g.Name)
	if err := goCmd(dir, stdout, stderr, "build", "-o", bin, "./cmd/"+g.Name); err != nil {
		return fmt.Errorf("go build of the emitted program failed: %w", err)
	}
	fmt.Fprintf(stdout, "lanthorn demo: %s selftest\n", g.Name)
	cmd := exec.Command(bin, "selftest")
	cmd.Dir, cmd.Stdout, cmd.Stderr = dir, stdout, stderr
	if err := cmd.Run(); err != nil {
		return fmt.Errorf("self-test failed: %w", err)
	}
	return nil
}

// loadDemo parses the embedded demo spec.
func loadDemo() (*ir.Graph, error) {
	data, err := fs.ReadFile(demo.Files, demo.Spec)
	if err != nil {
		return nil, err
	}
	return spec.Parse(demo.Spec, data, demo.Files)
}

// demoInputsSHA256 hashes the embedded demo's spec and weight files, as
// build hashes a spec's files on disk.
func demoInputsSHA256() (string, error) {
	data, err := fs.ReadFile(demo.Files, demo.Spec)
	if err != nil {
		return "", err
	}
	_, inputs, err := spec.ParseWithFiles(demo.Spec, data, demo.Files)
	if err != nil {
		return "", err
	}
	return emit.InputsSHA256(demo.Files, inputs)
}

func goCmd(dir string, stdout, stderr io.Writer, args ...string) error {
	gobin := "go"
	if root := os.Getenv("GOROOT"); root != "" {
		if p := filepath.Join(root, "bin", "go"); fileExists(p) {
			gobin = p
		}
	}
	cmd := exec.Command(gobin, args...)
	cmd.Dir, cmd.Stdout, cmd.Stderr = dir, stdout, stderr
	cmd.Env = append(os.Environ(), "GOWORK=off")
	return cmd.Run()
}

func fileExists(p string) bool {
	_, err := os.Stat(p)
	return err == nil
}
