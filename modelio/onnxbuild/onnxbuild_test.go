package onnxbuild

import (
	"encoding/binary"
	"math"
	"testing"
)

// Xorshift weights follow Marsaglia's xor32 generator (Marsaglia, "Xorshift
// RNGs", J. Stat. Software 8(14), 2003: y ^= y<<13; y ^= y>>17; y ^= y<<5,
// seed 2463534242), whose first output is 723471715 (from memory, the
// value commonly quoted for that seed). The first weight is then
// 715/2000 - 0.25 = 0.1075 (hand arithmetic), and a weight never leaves
// [-0.25, 0.25).
func TestXorshiftWeights(t *testing.T) {
	b := New(13, Xorshift)
	b.Weight("w", 4, 50)
	raw := b.Graph.Initializer[0].GetRawData()
	if len(raw) != 4*200 {
		t.Fatalf("raw data has %d bytes, want 800 (4 × 50 float32)", len(raw))
	}
	first := math.Float32frombits(binary.LittleEndian.Uint32(raw))
	if want := float32(715)/2000 - 0.25; first != want {
		t.Errorf("first weight %g, want %g (xor32 output 723471715 mod 1000 = 715)", first, want)
	}
	for i := 0; i < 200; i++ {
		v := math.Float32frombits(binary.LittleEndian.Uint32(raw[4*i:]))
		if v < -0.25 || v >= 0.25 {
			t.Fatalf("weight %d = %g outside [-0.25, 0.25)", i, v)
		}
	}
}
