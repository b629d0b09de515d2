package passes

// MaxLogQP128 is the largest log2(QP) for which a ring of degree 2^logN is
// estimated to give 128-bit classical security with a uniform ternary
// secret and error of standard deviation 3.2: Table 1 of the
// HomomorphicEncryption.org Security Standard (Albrecht et al., November
// 2018). The values are quoted from that table (from memory; tests check
// the chosen parameters against them). Ring degrees outside the table have
// no entry and are refused unless a spec says insecure.
var MaxLogQP128 = map[int]int{
	10: 27,
	11: 54,
	12: 109,
	13: 218,
	14: 438,
	15: 881,
}

// SecuritySource names the table, for reports and emitted security notes.
const SecuritySource = "HomomorphicEncryption.org Security Standard (2018), Table 1: 128-bit classical security, uniform ternary secret, error σ = 3.2"
