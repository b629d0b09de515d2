package runtime

import "math"

// Precision summarises how far decrypted values are from reference values.
type Precision struct {
	MaxAbsErr  float64 // largest |want-have|
	MeanAbsErr float64 // mean |want-have|
	Bits       float64 // -log2(MaxAbsErr): bits of precision of the worst slot
}

// Compare measures have against want slot by slot. Entries present in only
// one of the two, and NaN or infinite values, count as an infinite error, so
// a mismatch can never pass for precision.
func Compare(want, have []float64) Precision {
	n := max(len(want), len(have))
	if n == 0 {
		return Precision{Bits: math.Inf(1)}
	}
	var maxErr, sum float64
	for i := 0; i < n; i++ {
		d := math.Inf(1)
		if i < len(want) && i < len(have) {
			d = math.Abs(want[i] - have[i])
			if math.IsNaN(d) {
				d = math.Inf(1)
			}
		}
		maxErr = math.Max(maxErr, d)
		sum += d
	}
	return Precision{MaxAbsErr: maxErr, MeanAbsErr: sum / float64(n), Bits: -math.Log2(maxErr)}
}
