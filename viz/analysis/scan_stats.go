package analysis

// The scan's inner loop reads every value of every captured map once, so it
// is written for speed: see mapStats (per architecture) and its portable
// form mapStatsGo. Both are checked against a plain float64 loop in
// scan_stats_test.go.

// mapStatsGo is mapStats in portable Go: four independent lanes for the
// maximum and the sum (the compiler does not vectorise), float32 partial
// sums over blocks of at most 256 values, added up in float64.
func mapStatsGo(m []float32) (float32, float64) {
	mx0, mx1, mx2, mx3 := m[0], m[0], m[0], m[0]
	var sum float64
	for len(m) >= 4 {
		blk := m[:min(len(m)&^3, 256)]
		var s0, s1, s2, s3 float32
		for i := 0; i+4 <= len(blk); i += 4 {
			v := blk[i : i+4 : i+4]
			a, b, c, d := v[0], v[1], v[2], v[3]
			if a > mx0 {
				mx0 = a
			}
			if b > mx1 {
				mx1 = b
			}
			if c > mx2 {
				mx2 = c
			}
			if d > mx3 {
				mx3 = d
			}
			s0 += a
			s1 += b
			s2 += c
			s3 += d
		}
		sum += float64(s0+s1) + float64(s2+s3)
		m = m[len(blk):]
	}
	for _, v := range m {
		if v > mx0 {
			mx0 = v
		}
		sum += float64(v)
	}
	return max(mx0, mx1, mx2, mx3), sum
}
