package analysis

import "math"

// Wilson: a temporary copy of the evaluation's interval until that lands on
// main (then this file goes).
func Wilson(k, n int, z float64) (lo, hi float64) {
	if n <= 0 {
		return 0, 1
	}
	nf := float64(n)
	p := float64(k) / nf
	z2 := z * z
	den := 1 + z2/nf
	centre := (p + z2/(2*nf)) / den
	half := z / den * math.Sqrt(p*(1-p)/nf+z2/(4*nf*nf))
	return max(0, centre-half), min(1, centre+half)
}
