//go:build amd64 && !purego

package analysis

import "golang.org/x/sys/cpu"

// useAVX: the AVX kernel needs the instructions and the operating system's
// support for the 256-bit registers (cpu.X86.HasAVX checks both).
var useAVX = cpu.X86.HasAVX

// maxSumAVX returns the largest value and the float32 sum of the n values
// at p; n must be a positive multiple of 32. It keeps four 8-lane maxima
// and sums (VMAXPS, VADDPS) and reduces them at the end. A NaN can be
// dropped from the maximum but always poisons the sum.
//
//go:noescape
func maxSumAVX(p *float32, n int) (mx, sum float32)

// mapStats returns the largest value and the sum of the values of m (not
// empty): the AVX kernel over blocks of at most 1024 values (float32 sums
// of 32 values per lane, added up in float64), the rest in Go. A NaN
// anywhere makes the sum NaN.
func mapStats(m []float32) (float32, float64) {
	if !useAVX || len(m) < 32 {
		return mapStatsGo(m)
	}
	mx := m[0]
	var sum float64
	for len(m) >= 32 {
		n := min(len(m)&^31, 1024)
		bm, bs := maxSumAVX(&m[0], n)
		if bm > mx {
			mx = bm
		}
		sum += float64(bs)
		m = m[n:]
	}
	if len(m) > 0 {
		tm, ts := mapStatsGo(m)
		if tm > mx {
			mx = tm
		}
		sum += ts
	}
	return mx, sum
}
