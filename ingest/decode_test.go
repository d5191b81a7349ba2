package ingest

import (
	"math/rand/v2"
	"testing"
)

// TestVectorDecode checks that the AVX2 ci16_le decoder gives exactly the
// samples and clip count of the Go loop, on random codes with the extreme
// codes (−32768, 32767) sprinkled in, for lengths with and without a
// scalar tail.
func TestVectorDecode(t *testing.T) {
	if !hasVectorDecode {
		t.Skip("no vector decoder on this machine (needs amd64 with AVX2, without the purego tag)")
	}
	rng := rand.New(rand.NewPCG(3, 3))
	for _, n := range []int{1, 7, 8, 9, 64, 1000, 65536} {
		raw := make([]byte, 4*n)
		for i := 0; i < len(raw); i += 2 {
			v := uint16(rng.Uint32())
			switch rng.IntN(20) {
			case 0:
				v = 0x7fff
			case 1:
				v = 0x8000
			}
			raw[i], raw[i+1] = byte(v), byte(v>>8)
		}
		var got [2][]complex64
		var clip [2]int
		for k, vec := range []bool{false, true} {
			old := useVectorDecode
			useVectorDecode = vec
			got[k] = make([]complex64, n)
			clip[k], _ = CI16LE.Decode(got[k], raw)
			useVectorDecode = old
		}
		if clip[0] != clip[1] {
			t.Errorf("n=%d: clipped %d (Go) vs %d (vector)", n, clip[0], clip[1])
		}
		for i := range n {
			if got[0][i] != got[1][i] {
				t.Fatalf("n=%d sample %d: %v (Go) vs %v (vector)", n, i, got[0][i], got[1][i])
			}
		}
	}
}
