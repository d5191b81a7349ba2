package ingest

import (
	"bytes"
	"errors"
	"io"
	"math"
	"math/rand/v2"
	"testing"
)

// TestOccupancyLevelTable checks OccupancyLevelDB against the table of
// REFERENCES §12.3 (p = P(|x| > T) → 20·log10(σ/T), σ/T = 1/(√2·erfc⁻¹(p));
// the table is rounded to 0.01 dB and p = 0.317 stands for erfc(1/√2) =
// 0.3173, hence a tolerance of 0.01 dB) and the saturation flag above
// p = 0.95 ("saturates above p ≈ 0.95: flag it").
func TestOccupancyLevelTable(t *testing.T) {
	table := []struct{ p, db float64 }{
		{0.20, -2.15}, {0.25, -1.22}, {0.317, 0}, {0.40, 1.50}, {0.50, 3.42},
		{0.60, 5.61}, {0.70, 8.28}, {0.80, 11.93}, {0.90, 18.02}, {0.95, 24.05},
	}
	for _, tc := range table {
		db, sat := OccupancyLevelDB(tc.p)
		if math.Abs(db-tc.db) > 0.01 || sat {
			t.Errorf("p = %g: %.3f dB (saturated %v), want %.2f dB (REFERENCES §12.3)", tc.p, db, sat, tc.db)
		}
	}
	for _, p := range []float64{0.951, 0.99, 1, 0, -0.1, math.NaN()} {
		if _, sat := OccupancyLevelDB(p); !sat {
			t.Errorf("p = %g not flagged saturated", p)
		}
	}
	// σ = T: the Gaussian fraction beyond 1σ, erfc(1/√2) = 0.31731 (§9).
	if db, _ := OccupancyLevelDB(math.Erfc(1 / math.Sqrt2)); math.Abs(db) > 1e-9 {
		t.Errorf("p = erfc(1/√2): %g dB, want 0", db)
	}
}

// TestLevels checks the level count on decoded data of each kind of
// quantizer (REFERENCES §12.3: sign-magnitude 2-bit written as ±1, ±3;
// ternary; raw 2-bit two's complement −2, −1, 0, +1 with its −0.5 LSB
// mean; offset binary around 127.5) and on full-resolution data.
func TestLevels(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	pick := func(vals []int) []float32 {
		out := make([]float32, 4096)
		for i := range out {
			out[i] = float32(vals[rng.IntN(len(vals))])
		}
		return out
	}
	cases := []struct {
		name    string
		f       Format
		codes   []int // drawn at random; nil: Gaussian full-resolution
		want    string
		bits    int
		thrCode float64 // threshold in codes relative to mid-scale; 0: none
	}{
		{"2-bit ±1 ±3", RI8, []int{-3, -1, 1, 3}, "2-bit: levels ±1, ±3", 2, 2},
		{"1-bit", RI8, []int{-1, 1}, "1-bit: levels ±1", 1, 0},
		{"ternary", RI8, []int{-1, 0, 1}, "2-bit: levels 0, ±1", 2, 0.5},
		{"two's complement", RI16LE, []int{-2, -1, 0, 1}, "2-bit: levels −2, −1, 0, 1", 2, 0},
		{"3-bit", RI8, []int{-7, -5, -3, -1, 1, 3, 5, 7}, "3-bit: levels ±1, ±3, ±5, ±7", 3, 2},
		{"offset binary", RU8, []int{126, 127, 128, 129}, "2-bit: levels 126, 127, 128, 129", 2, 1},
		{"dead", RI8, []int{0}, "one level only: 0", 0, 0},
		{"full resolution", RI16LE, nil, "more than 3 bits", 0, 0},
	}
	for _, tc := range cases {
		var vals []float32
		if tc.codes == nil {
			vals = make([]float32, 4096)
			for i := range vals {
				vals[i] = float32(rng.NormFloat64() * 0.1)
			}
		} else {
			codes := pick(tc.codes)
			scale, offset := tc.f.complexTwin().scale()
			vals = make([]float32, len(codes))
			for i, c := range codes {
				vals[i] = float32((float64(c) - offset) / scale)
			}
		}
		raw := make([]byte, len(vals)*tc.f.SampleBytes())
		tc.f.EncodeReal(raw, vals)
		dec := make([]float32, len(vals))
		tc.f.DecodeReal(dec, raw)
		l := levelsOfReal(dec, tc.f)
		// The count stops at the ninth distinct value: the verdict is in.
		measured := len(vals)
		if tc.codes == nil {
			measured = l.Measured
		}
		if l.String() != tc.want || l.Bits() != tc.bits || l.Measured != measured || l.Measured < maxLevels+1 {
			t.Errorf("%s: %q (%d bits, %d measured), want %q (%d bits)", tc.name, l, l.Bits(), l.Measured, tc.want, tc.bits)
		}
		thr, ok := l.Threshold()
		scale, _ := tc.f.complexTwin().scale()
		if ok != (tc.thrCode != 0) || (ok && math.Abs(float64(thr)*scale-tc.thrCode) > 1e-4) {
			t.Errorf("%s: threshold %g codes (ok %v), want %g", tc.name, float64(thr)*scale, ok, tc.thrCode)
		}
	}
	// Floats holding 2-bit values, and complex data (I and Q together).
	l := levelsOfComplex([]complex64{complex(1, -3), complex(3, -1), complex(-1, 1)}, CF32LE)
	if l.String() != "2-bit: levels ±1, ±3" {
		t.Errorf("cf32 ±1 ±3: %q", l)
	}
	if (Levels{}).String() != "not measured" {
		t.Error("zero Levels must say not measured")
	}
}

// twoBitNoise quantizes Gaussian noise of standard deviation sigma (in
// units of the threshold T = 2 codes) to the sign-magnitude levels ±1, ±3
// of REFERENCES §12.3 (|x| > T → 3).
func twoBitNoise(rng *rand.Rand, n int, sigma float64) []float32 {
	out := make([]float32, n)
	for i := range out {
		x := rng.NormFloat64() * sigma
		v := float32(1)
		if math.Abs(x) > 1 {
			v = 3
		}
		if x < 0 {
			v = -v
		}
		out[i] = v / 128
	}
	return out
}

// TestOccupancyFromData quantizes Gaussian noise with σ/T = 1.5 to 2 bits,
// writes it as ri8 (real, through the IF Reader) and as ci8 (complex), and
// checks that the front-end check's occupancy gives 20·log10(1.5) =
// 3.52 dB (REFERENCES §12.3): p = erfc(1/(1.5·√2)) = 0.505; with 4·10⁵
// components the standard deviation of p is 8·10⁻⁴, about 0.02 dB at
// p = 0.5; the tolerance is 0.1 dB [C].
func TestOccupancyFromData(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	const n = 400000
	vals := twoBitNoise(rng, n, 1.5)
	want := 20 * math.Log10(1.5)
	// Real: ri8 at 8 MS/s, IF 2 MHz.
	raw := make([]byte, n)
	RI8.EncodeReal(raw, vals)
	r, err := NewIFReader(bytes.NewReader(raw), "mem.ri8", RI8, 4096, n, 8e6, IFConversion{2e6, LowSide})
	if err != nil {
		t.Fatal(err)
	}
	r.CheckFrontEnd()
	drain(t, r)
	fe, _ := r.FrontEnd()
	r.Close()
	if !fe.HasOccupancy || fe.Samples != n || !fe.Real || r.Levels().String() != "2-bit: levels ±1, ±3" {
		t.Fatalf("real: %+v, levels %q", fe, r.Levels())
	}
	if db, sat := OccupancyLevelDB(fe.Occupancy); math.Abs(db-want) > 0.1 || sat {
		t.Errorf("real: occupancy %.4f → %.3f dB, want %.3f", fe.Occupancy, db, want)
	}
	// Complex: the same values as I, Q pairs.
	cs := make([]complex64, n/2)
	for i := range cs {
		cs[i] = complex(vals[2*i], vals[2*i+1])
	}
	raw = make([]byte, n)
	CI8.Encode(raw, cs)
	r = NewReader(bytes.NewReader(raw), "mem.ci8", CI8, 4096, n/2)
	r.CheckFrontEnd()
	drain(t, r)
	fe2, _ := r.FrontEnd()
	r.Close()
	if fe2.Occupancy != fe.Occupancy || fe2.Real || fe2.Samples != n/2 {
		t.Errorf("complex occupancy %g over %d samples, want %g as the real one", fe2.Occupancy, fe2.Samples, fe.Occupancy)
	}
}

func drain(t *testing.T, r *Reader) {
	t.Helper()
	for {
		_, err := r.Next()
		if errors.Is(err, io.EOF) {
			return
		}
		if err != nil {
			t.Fatal(err)
		}
	}
}
