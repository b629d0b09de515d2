// Command lanthorn compiles a model spec into a standalone Go program that
// evaluates the model on CKKS-encrypted inputs.
//
//	lanthorn build SPEC -o DIR     write the program for SPEC into DIR
//	lanthorn check SPEC -o DIR     exit 0 if DIR holds what build writes, 1 if stale, 2 on error
//	lanthorn demo                  build, compile and self-test the embedded demo
//	lanthorn version               print the generator version
package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strings"
)

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

// errUsage marks an error whose message is a usage text already printed.
var errUsage = errors.New("usage")

// exitError makes the command exit with its code rather than 1; err, if
// any, is printed as other errors are.
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string {
	if e.err == nil {
		return fmt.Sprintf("exit status %d", e.code)
	}
	return e.err.Error()
}

func (e *exitError) Unwrap() error { return e.err }

type command struct {
	name  string
	short string
	run   func(args []string, stdout, stderr io.Writer) error
}

func commands() []command {
	return []command{
		{"build", "write the encrypted program for a spec", runBuild},
		{"check", "check that a folder holds what build writes (exit 1 if stale)", runCheck},
		{"plan", "print the encrypted evaluation plan of a spec for review", runPlan},
		{"calibrate", "measure the cost model of this machine", runCalibrate},
		{"demo", "build, compile and self-test the embedded demo model", runDemo},
		{"version", "print the generator version", runVersion},
	}
}

func usage(w io.Writer) {
	fmt.Fprintf(w, "lanthorn compiles a model spec into a Go program that evaluates it on CKKS-encrypted inputs.\n\nUsage: lanthorn COMMAND [flags]\n\nCommands:\n")
	for _, c := range commands() {
		fmt.Fprintf(w, "  %-8s %s\n", c.name, c.short)
	}
	fmt.Fprintf(w, "\nRun lanthorn COMMAND -h for a command's flags.\n")
}

func run(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 || args[0] == "-h" || args[0] == "-help" || args[0] == "--help" || args[0] == "help" {
		usage(stdout)
		if len(args) == 0 {
			return 2
		}
		return 0
	}
	for _, c := range commands() {
		if c.name != args[0] {
			continue
		}
		err := c.run(args[1:], stdout, stderr)
		var exit *exitError
		switch {
		case err == nil:
			return 0
		case errors.Is(err, flag.ErrHelp):
			return 0
		case errors.Is(err, errUsage):
			return 2
		case errors.As(err, &exit):
			if exit.err != nil {
				fmt.Fprintf(stderr, "lanthorn %s: %s\n", c.name, indent(exit.err.Error()))
			}
			return exit.code
		default:
			fmt.Fprintf(stderr, "lanthorn %s: %s\n", c.name, indent(err.Error()))
			return 1
		}
	}
	fmt.Fprintf(stderr, "lanthorn: unknown command %q\n\n", args[0])
	usage(stderr)
	return 2
}

// indent keeps multi-line errors (a spec's error list) readable.
func indent(s string) string {
	if !strings.Contains(s, "\n") {
		return s
	}
	return "\n  " + strings.ReplaceAll(s, "\n", "\n  ")
}

// parseFlags parses flags that may stand before or after the positional
// arguments, as in `lanthorn build spec.yaml -o out`.
func parseFlags(fs *flag.FlagSet, args []string, stderr io.Writer) ([]string, error) {
	fs.SetOutput(stderr)
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return nil, err
			}
			return nil, errUsage
		}
		args = fs.Args()
		if len(args) == 0 {
			return pos, nil
		}
		pos = append(pos, args[0])
		args = args[1:]
	}
}

func runVersion(args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("version", flag.ContinueOnError)
	fs.Usage = func() { fmt.Fprintf(stderr, "Usage: lanthorn version\n\nPrints the generator version.\n") }
	if _, err := parseFlags(fs, args, stderr); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "lanthorn %s\n", version())
	return nil
}
