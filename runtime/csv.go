package runtime

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
)

// Limits of ReadCSVRow: an input vector takes a line of a few KB, so these
// refuse only files that are not input vectors.
const (
	maxCSVSize = 64 << 20 // bytes in a file
	maxCSVLine = 16 << 20 // bytes in a line
)

// ReadCSVRow reads an input file of vectors of n numbers, one per line
// (blank lines and lines starting with # are skipped), checks every vector
// and returns vector row, counted from 1, with the number of vectors. Row 0
// asks for the only vector of a file that holds one. Errors name the file
// and line. It holds one vector in memory whatever the file's size, and
// refuses files over 64 MB.
func ReadCSVRow(path string, n, row int) ([]float64, int, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, 0, err // *PathError already names the file
	}
	defer f.Close()
	if st, err := f.Stat(); err == nil && !st.Mode().IsRegular() {
		return nil, 0, fmt.Errorf("%s: not a regular file", path)
	}
	return readCSV(f, path, n, row)
}

// readCSV is ReadCSVRow on a reader; name names it in errors.
func readCSV(r io.Reader, name string, n, row int) ([]float64, int, error) {
	if n < 1 {
		return nil, 0, fmt.Errorf("%s: vectors of %d values asked, want at least 1", name, n)
	}
	if row < 0 {
		return nil, 0, fmt.Errorf("%s: vector %d asked, want 1 or more", name, row)
	}
	lr := &io.LimitedReader{R: r, N: maxCSVSize + 1}
	sc := bufio.NewScanner(lr)
	sc.Buffer(make([]byte, 0, 64<<10), maxCSVLine)
	var vals, x []float64
	count, line := 0, 0
	for sc.Scan() {
		line++
		if lr.N == 0 {
			break // over the cap; the line may be cut
		}
		text := strings.TrimSpace(sc.Text())
		if text == "" || strings.HasPrefix(text, "#") {
			continue
		}
		// Count before splitting, so a line of commas costs nothing.
		if got := strings.Count(text, ",") + 1; got != n {
			return nil, 0, fmt.Errorf("%s:%d: %s, want %d", name, line, plural(got, "value"), n)
		}
		if vals == nil {
			vals = make([]float64, n)
		}
		for i, s := range strings.Split(text, ",") {
			s = strings.TrimSpace(s)
			v, err := strconv.ParseFloat(s, 64)
			if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, 0, fmt.Errorf("%s:%d: column %d: %q is not a finite number", name, line, i+1, s)
			}
			vals[i] = v
		}
		count++
		if count == max(row, 1) {
			x = slices.Clone(vals)
		}
	}
	switch err := sc.Err(); {
	case lr.N == 0:
		return nil, 0, fmt.Errorf("%s: larger than %d MB; an input file holds vectors of %d values", name, maxCSVSize>>20, n)
	case errors.Is(err, bufio.ErrTooLong):
		return nil, 0, fmt.Errorf("%s:%d: line longer than %d MB", name, line+1, maxCSVLine>>20)
	case err != nil:
		return nil, 0, fmt.Errorf("%s: %w", name, err)
	case count == 0:
		return nil, 0, fmt.Errorf("%s: no input vectors", name)
	case row == 0 && count > 1:
		return nil, 0, fmt.Errorf("%s has %s; choose one with -row", name, plural(count, "vector"))
	case row > count:
		return nil, 0, fmt.Errorf("%s has %s; -row %d is out of range", name, plural(count, "vector"), row)
	}
	return x, count, nil
}

// plural counts things: "1 vector", "3 vectors".
func plural(n int, noun string) string {
	if n == 1 {
		return "1 " + noun
	}
	return strconv.Itoa(n) + " " + noun + "s"
}
