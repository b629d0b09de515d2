package passes

import (
	"fmt"
	"math"

	"github.com/lanthorn/lanthorn/ir"
)

// maxToleranceLevels bounds the interpolants offered for a tolerance: depth
// 6 is degree 63, the largest a spec may declare.
const maxToleranceLevels = 6

// DegreeOption is one interpolant the approximate pass offers for an
// activation declared with a tolerance: the smallest degree that meets the
// tolerance with that many levels.
type DegreeOption struct {
	Degree int       // degree interpolated at (the trimmed polynomial may be one lower)
	Levels int       // levels the polynomial consumes
	MaxErr float64   // measured as approxError does
	Coeffs []float64 // Chebyshev coefficients over [-1, 1] (the interval mapped)
}

// degreeOptions returns, for each number of levels from 1 to
// maxToleranceLevels, the smallest degree whose interpolant of f over
// [lo, hi] meets tol, or none when no degree does at that depth. A higher
// degree with the same levels only costs more products, so it is not
// offered; a deeper option costs more levels and more products, but the
// selection weighs it anyway (and shows it as a runner-up). closest is the
// smallest error seen, for the message when nothing meets tol.
func degreeOptions(f func(float64) float64, lo, hi, tol float64) (opts []DegreeOption, closest float64) {
	closest = math.Inf(1)
	for k := 1; k <= maxToleranceLevels; k++ {
		for d := 1 << (k - 1); d <= 1<<k-1; d++ {
			c := trimCoeffs(ChebyshevInterpolant(f, lo, hi, d))
			if ir.PolyDepth(len(c)-1) != k {
				continue // an odd or even function lost its top term: a shallower option covers it
			}
			e := approxError(f, c, lo, hi)
			closest = math.Min(closest, e)
			if e <= tol {
				opts = append(opts, DegreeOption{Degree: d, Levels: k, MaxErr: e, Coeffs: c})
				break
			}
		}
	}
	return opts, closest
}

// approxError is the largest |f(x) − p(x)| over the 4097 evenly spaced
// points of MaxDeviation and the 1025 Chebyshev points lo + (hi−lo)(1 +
// cos(πk/1024))/2, which crowd towards the ends of the interval, where
// interpolation errors peak. It is measured, not a proven bound.
func approxError(f func(float64) float64, coeffs []float64, lo, hi float64) float64 {
	worst := MaxDeviation(f, coeffs, lo, hi)
	const n = 1024
	for k := 0; k <= n; k++ {
		t := math.Cos(math.Pi * float64(k) / n)
		x := lo + (hi-lo)*(t+1)/2
		worst = math.Max(worst, math.Abs(f(x)-ir.EvalPoly(ir.Chebyshev, coeffs, t)))
	}
	return worst
}

// approximateToTolerance sets the interpolant of an activation declared
// with a tolerance: the degree the selection chose (Options.Degree), else
// the shallowest one offered. The offers are recorded in the report.
func approximateToTolerance(s *State, l *ir.Layer, f func(float64) float64) error {
	a := l.Act
	lo, hi := a.Interval[0], a.Interval[1]
	opts, closest := degreeOptions(f, lo, hi, a.Tolerance)
	if len(opts) == 0 {
		return fmt.Errorf("%s: %s: no interpolant of degree up to %d meets tolerance %g for %s on [%g, %g] (the closest reaches %.2e); raise the tolerance or narrow the interval",
			l.Pos, l.Name, 1<<maxToleranceLevels-1, a.Tolerance, a.Func, lo, hi, closest)
	}
	if s.Report.Degrees == nil {
		s.Report.Degrees = map[string][]DegreeOption{}
	}
	s.Report.Degrees[l.Name] = opts
	pick := opts[0]
	if d, ok := s.Opts.Degree[l.Name]; ok {
		found := false
		for _, o := range opts {
			if o.Degree == d {
				pick, found = o, true
			}
		}
		if !found {
			return fmt.Errorf("%s: %s: degree %d is not among those that meet tolerance %g", l.Pos, l.Name, d, a.Tolerance)
		}
	}
	a.Degree, a.Coeffs, a.Basis = pick.Degree, pick.Coeffs, ir.Chebyshev
	s.note("%s: %s on [%g, %g] by a Chebyshev interpolant of degree %d (%d levels), max error %.2e within tolerance %g (%d degrees offered)",
		l.Name, a.Func, lo, hi, len(a.Coeffs)-1, pick.Levels, pick.MaxErr, a.Tolerance, len(opts))
	return nil
}
