package ingest

import (
	"bytes"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
)

// noise returns n complex samples of Gaussian noise, σ per component
// (invented test data: a live front end).
func noise(seed uint64, n int, sigma float64) []complex64 {
	rng := rand.New(rand.NewPCG(seed, seed+1))
	x := make([]complex64, n)
	for i := range x {
		x[i] = complex(float32(rng.NormFloat64()*sigma), float32(rng.NormFloat64()*sigma))
	}
	return x
}

// feed gives x to a check in blocks of bs, as a Reader would.
func feed(a *FrontEndCheck, x []complex64, bs int) {
	for len(x) > 0 {
		k := min(bs, len(x))
		a.AddComplex(x[:k])
		x = x[k:]
	}
}

// TestFrontEndFaults builds one capture per fault (and clean ones) and
// checks the kind, the numbers in the one-sentence detail, and the gap
// ranges, fed in blocks that cut the runs. The thresholds are the ones
// the constants state (DefaultMinGap 64, UnnormalisedRMS 4,
// UnnormalisedPeak 100): this checks that the code keeps its stated
// rules, on invented data.
func TestFrontEndFaults(t *testing.T) {
	zeroAt := func(x []complex64, ranges ...[2]int) []complex64 {
		for _, r := range ranges {
			clear(x[r[0]:r[1]])
		}
		return x
	}
	scaled := func(x []complex64, k float32) []complex64 {
		for i := range x {
			x[i] *= complex(k, 0)
		}
		return x
	}
	constI := func(x []complex64, v float32) []complex64 {
		for i := range x {
			x[i] = complex(v, imag(x[i]))
		}
		return x
	}
	cases := []struct {
		name   string
		format Format
		x      []complex64
		kind   string
		detail []string
		gaps   []Gap
		count  int64
	}{
		{"clean", CI16LE, noise(1, 20000, 0.1), "", nil, nil, 0},
		{"dead", CI16LE, make([]complex64, 5000), FaultDead, []string{"all 5000 samples", "exactly zero"}, nil, 0},
		{"stuck", CI8, slices.Repeat([]complex64{complex(0.5, -0.25)}, 3000), FaultStuck,
			[]string{"all 3000 samples", "same value", "I 0.5", "Q -0.25"}, nil, 0},
		{"I stuck", CI16LE, constI(noise(2, 3000, 0.1), 0), FaultStuck, []string{"I is 0 in all 3000 samples while Q varies"}, nil, 0},
		{"gaps", CI16LE, zeroAt(noise(3, 20000, 0.1), [2]int{1000, 1100}, [2]int{5000, 5064}, [2]int{7000, 7063}, [2]int{19950, 20000}),
			FaultGap, []string{"2 run(s) of at least 64 exact zeros", "164 samples in all", "samples 1000–1099"},
			[]Gap{{1000, 100}, {5000, 64}}, 2},
		// Runs that start and end off the eight-sample step of the scan.
		{"gaps off the step", CI16LE, zeroAt(noise(9, 20000, 0.1), [2]int{1003, 1070}, [2]int{5001, 5064}),
			FaultGap, []string{"1 run(s) of at least 64 exact zeros", "67 samples in all", "samples 1003–1069"},
			[]Gap{{1003, 67}}, 1},
		{"gap at the end", CI16LE, zeroAt(noise(4, 10000, 0.1), [2]int{9000, 10000}), FaultGap,
			[]string{"1 run(s)", "9000–9999"}, []Gap{{9000, 1000}}, 1},
		{"gap at the start", CF32LE, zeroAt(noise(5, 10000, 0.1), [2]int{0, 70}), FaultGap,
			[]string{"samples 0–69"}, []Gap{{0, 70}}, 1},
		{"unnormalised RMS", CF32LE, scaled(noise(6, 10000, 0.1), 1000), FaultUnnormalised,
			[]string{"RMS 14", "limits RMS 4, peak 100", "integer codes stored as floats"}, nil, 0},
		{"unnormalised peak", CF32LE, func() []complex64 { x := noise(7, 10000, 0.1); x[77] = 150; return x }(),
			FaultUnnormalised, []string{"peak 150"}, nil, 0},
		{"hot but normalised", CF32LE, scaled(noise(8, 10000, 0.1), 20), "", nil, nil, 0},
		{"integer never unnormalised", CI16LE, scaled(noise(9, 10000, 0.1), 9), "", nil, nil, 0},
		{"too short to judge", CI16LE, make([]complex64, 63), "", nil, nil, 0},
	}
	for _, tc := range cases {
		for _, bs := range []int{1, 37, 4096} {
			a := NewFrontEndCheck(tc.format)
			feed(a, tc.x, bs)
			r := a.Result()
			if r.Fault.Kind != tc.kind || r.Samples != int64(len(tc.x)) {
				t.Errorf("%s (blocks of %d): fault %+v over %d samples, want %q", tc.name, bs, r.Fault, r.Samples, tc.kind)
				continue
			}
			for _, d := range tc.detail {
				if !strings.Contains(r.Fault.Detail, d) {
					t.Errorf("%s: detail %q does not say %q", tc.name, r.Fault.Detail, d)
				}
			}
			if tc.kind != "" && (!strings.HasSuffix(r.Fault.Detail, ".") || strings.Count(r.Fault.Detail, ". ") > 0) {
				t.Errorf("%s: detail %q is not one sentence", tc.name, r.Fault.Detail)
			}
			if tc.gaps != nil && (!slices.Equal(r.Gaps, tc.gaps) || r.GapCount != tc.count) {
				t.Errorf("%s: gaps %v (%d), want %v (%d)", tc.name, r.Gaps, r.GapCount, tc.gaps, tc.count)
			}
		}
	}
}

// TestFrontEndReal checks the real-valued side: dead, stuck, gaps in
// file-sample indices (as the IF Reader feeds them), and that the Reader
// reports them for an ri16_le capture read in blocks.
func TestFrontEndReal(t *testing.T) {
	rng := rand.New(rand.NewPCG(41, 42))
	vals := make([]float32, 30000)
	for i := range vals {
		vals[i] = float32(rng.NormFloat64() * 0.1)
	}
	clear(vals[12345:12545]) // 200 zeros
	clear(vals[20000:20010]) // 10: too short
	raw := make([]byte, 2*len(vals))
	RI16LE.EncodeReal(raw, vals)
	r, err := NewIFReader(bytes.NewReader(raw), "mem", RI16LE, 1000, int64(len(vals)), 4e6, IFConversion{1e6, HighSide})
	if err != nil {
		t.Fatal(err)
	}
	r.CheckFrontEnd()
	drain(t, r)
	fe, ok := r.FrontEnd()
	r.Close()
	if !ok || fe.Fault.Kind != FaultGap || !slices.Equal(fe.Gaps, []Gap{{12345, 200}}) || fe.Samples != 30000 ||
		!strings.Contains(fe.Fault.Detail, "real samples 12345–12544") {
		t.Errorf("real gap: %+v", fe)
	}
	for name, tc := range map[string]struct {
		v    float32
		kind string
		say  string
	}{"dead": {0, FaultDead, "all 500 real samples are exactly zero"}, "stuck": {0.25, FaultStuck, "all 500 real samples hold the same value 0.25"}} {
		a := NewFrontEndCheck(RF32LE)
		a.AddReal(slices.Repeat([]float32{tc.v}, 300))
		a.AddReal(slices.Repeat([]float32{tc.v}, 200))
		if f := a.Result().Fault; f.Kind != tc.kind || !strings.Contains(f.Detail, tc.say) {
			t.Errorf("%s: %+v", name, f)
		}
	}
	// MinGap: shorter runs are reported when asked.
	a := NewFrontEndCheck(RF32LE)
	a.MinGap = 8
	x := slices.Repeat([]float32{0.5, -0.5}, 100)
	clear(x[50:60])
	a.AddReal(x)
	if g := a.Result().Gaps; !slices.Equal(g, []Gap{{50, 10}}) {
		t.Errorf("MinGap 8: gaps %v", g)
	}
}

// TestFrontEndGapsBounded: the list keeps MaxGaps runs, the count all.
func TestFrontEndGapsBounded(t *testing.T) {
	x := noise(10, 100000, 0.1)
	for k := range 40 {
		clear(x[1000+2000*k : 1000+2000*k+100])
	}
	a := NewFrontEndCheck(CI16LE)
	feed(a, x, 4096)
	r := a.Result()
	if len(r.Gaps) != MaxGaps || r.GapCount != 40 || r.GapSamples != 4000 || r.Gaps[MaxGaps-1] != (Gap{1000 + 2000*(MaxGaps-1), 100}) {
		t.Errorf("gaps %d listed, %d counted, %d samples", len(r.Gaps), r.GapCount, r.GapSamples)
	}
}

// BenchmarkFrontEndCheck measures the check's cost per sample on live
// noise (the usual case), 64 Ki samples per operation: integer complex
// (ci16_le), float complex (cf32_le: also the RMS and peak), real
// (ri16_le, per real value) and 2-bit complex (also the occupancy).
// Compare with the spectral pass's ~120 MS/s (about 8 ns a sample).
func BenchmarkFrontEndCheck(b *testing.B) {
	x := noise(12, benchSamples, 0.1)
	b.Run("complex", func(b *testing.B) {
		a := NewFrontEndCheck(CI16LE)
		b.SetBytes(int64(len(x)))
		b.ReportAllocs()
		for b.Loop() {
			a.AddComplex(x)
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(len(x)), "ns/sample")
	})
	b.Run("complex-float", func(b *testing.B) {
		a := NewFrontEndCheck(CF32LE)
		b.SetBytes(int64(len(x)))
		b.ReportAllocs()
		for b.Loop() {
			a.AddComplex(x)
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(len(x)), "ns/sample")
	})
	b.Run("real", func(b *testing.B) {
		a := NewFrontEndCheck(RI16LE)
		v := realsOf(x)
		b.SetBytes(int64(len(v)))
		b.ReportAllocs()
		for b.Loop() {
			a.AddReal(v)
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(len(v)), "ns/sample")
	})
	b.Run("complex-2bit", func(b *testing.B) {
		rng := rand.New(rand.NewPCG(1, 2))
		v := twoBitNoise(rng, 2*benchSamples, 1)
		y := make([]complex64, benchSamples)
		for i := range y {
			y[i] = complex(v[2*i], v[2*i+1])
		}
		a := NewFrontEndCheck(CI8)
		b.SetBytes(int64(len(y)))
		b.ReportAllocs()
		for b.Loop() {
			a.AddComplex(y)
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(len(y)), "ns/sample")
	})
}
