//go:build !amd64 || purego

package analysis

// useAVX is false where there is no AVX kernel.
const useAVX = false

// mapStats returns the largest value and the sum of the values of m (not
// empty). A NaN anywhere makes the sum NaN.
func mapStats(m []float32) (float32, float64) { return mapStatsGo(m) }
