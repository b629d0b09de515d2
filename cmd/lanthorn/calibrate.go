package main

import (
	"flag"
	"fmt"
	"io"
	"os"
	goruntime "runtime"
	"time"

	"github.com/lanthorn/lanthorn/passes"
	"github.com/lanthorn/lanthorn/runtime"
)

func runCalibrate(args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("calibrate", flag.ContinueOnError)
	out := fs.String("o", "", "profile `file` to write (YAML)")
	reps := fs.Int("reps", 9, "runs per primitive; the median is kept")
	fs.Usage = func() {
		fmt.Fprintf(stderr, "Usage: lanthorn calibrate -o profile.yaml\n\n"+
			"Measures the CKKS primitives (addition, plaintext and ciphertext products,\n"+
			"rescale, rotation, hoisted rotations, encoding) with lattigo on this machine\n"+
			"at ring degrees 2^13 to 2^15 and several levels, the key switches with one,\n"+
			"two and three special primes, and writes the cost model that build and plan\n"+
			"take with -profile. Takes about three minutes.\n\nFlags:\n")
		fs.PrintDefaults()
	}
	if _, err := parseFlags(fs, args, stderr); err != nil {
		return err
	}
	if *out == "" {
		fs.Usage()
		return errUsage
	}
	start := time.Now()
	var all []runtime.OpTiming
	for _, specials := range []int{1, 2, 3} {
		logP := make([]int, specials)
		for i := range logP {
			logP[i] = 50
		}
		for _, logN := range []int{13, 14, 15} {
			logQ := []int{50}
			for range 10 {
				logQ = append(logQ, 40)
			}
			ts, err := runtime.MeasureOps(logN, logQ, logP, []int{1, 3, 5, 7, 10}, *reps)
			if err != nil {
				return fmt.Errorf("calibrate logN %d, %d special primes: %w", logN, specials, err)
			}
			all = append(all, ts...)
			fmt.Fprintf(stderr, "measured logN %d, %d special primes (%s)\n", logN, specials, time.Since(start).Round(time.Second))
		}
	}
	machine := fmt.Sprintf("%s/%s, %d cores", goruntime.GOOS, goruntime.GOARCH, goruntime.NumCPU())
	prof, err := passes.FitProfile(machine, all)
	if err != nil {
		return err
	}
	b, err := prof.Marshal()
	if err != nil {
		return err
	}
	if err := os.WriteFile(*out, b, 0o644); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "wrote %s in %s\n", *out, time.Since(start).Round(time.Second))
	return nil
}

// loadProfile reads -profile, or returns the embedded default.
func loadProfile(path string) (*passes.Profile, error) {
	if path == "" {
		return passes.DefaultProfile(), nil
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	p, err := passes.ParseProfile(b)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return p, nil
}
