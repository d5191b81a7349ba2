package ingest

import (
	"bytes"
	"encoding/hex"
	"math"
	"math/rand/v2"
	"testing"
)

// TestDecodeRealPairs checks that every real format decodes exactly as its
// complex twin decodes the same bytes as I and Q (the Reader relies on it:
// it decodes real data two values at a time with the twin's Decode), and
// that DecodeReal's clip count is per value while the twin's is per pair.
// Random bytes: every code of the 8- and 16-bit formats occurs.
func TestDecodeRealPairs(t *testing.T) {
	rng := rand.NewChaCha8([32]byte{7})
	for _, f := range RealFormats() {
		twin := f.complexTwin()
		if twin.String()[1:] != f.String()[1:] || twin.IsReal() {
			t.Fatalf("%s: twin %s", f, twin)
		}
		const n = 4096
		raw := make([]byte, n*f.SampleBytes())
		rng.Read(raw)
		if f.IsFloat() {
			// Finite values within ±2 (some clip): NaN handling is
			// per pair in the twin and per value here.
			vals := make([]float32, n)
			r := rand.New(rand.NewPCG(1, uint64(f)))
			for i := range vals {
				vals[i] = float32(4*r.Float64() - 2)
			}
			f.EncodeReal(raw, vals)
		}
		got := make([]float32, n)
		clipped, bad := f.DecodeReal(got, raw)
		pairs := make([]complex64, n/2)
		pc, pb := twin.Decode(pairs, raw)
		if bad != 0 || pb != 0 {
			t.Fatalf("%s: bad %d %d", f, bad, pb)
		}
		wantClipped, wantPairs := 0, 0
		for i, p := range pairs {
			if got[2*i] != real(p) || got[2*i+1] != imag(p) {
				t.Fatalf("%s: values %d, %d = %g, %g; twin gives %v", f, 2*i, 2*i+1, got[2*i], got[2*i+1], p)
			}
			a, b := atExtremeTest(f, raw, 2*i), atExtremeTest(f, raw, 2*i+1)
			if a {
				wantClipped++
			}
			if b {
				wantClipped++
			}
			if a || b {
				wantPairs++
			}
		}
		if clipped != wantClipped || pc != wantPairs {
			t.Errorf("%s: DecodeReal clipped %d (want %d values), twin %d (want %d pairs)", f, clipped, wantClipped, pc, wantPairs)
		}
	}
}

// atExtremeTest says whether value i of real format f in raw is at an
// extreme code (or, for floats, of magnitude ≥ 1), written out from the
// two's-complement and offset-binary definitions.
func atExtremeTest(f Format, raw []byte, i int) bool {
	w := f.SampleBytes()
	b := raw[i*w : (i+1)*w]
	var v []float32 = make([]float32, 1)
	if f.IsFloat() {
		f.DecodeReal(v, b)
		return v[0] >= 1 || v[0] <= -1
	}
	c := integerCodes[f.complexTwin()]
	le := f == RI16LE || f == RU16LE || f == RI32LE || f == RU32LE
	var u uint64
	for k := range w {
		if le {
			u |= uint64(b[k]) << (8 * k)
		} else {
			u = u<<8 | uint64(b[k])
		}
	}
	code := float64(u)
	if c.lo < 0 && u >= 1<<(8*w-1) { // two's complement
		code -= math.Ldexp(1, 8*w)
	}
	return code == c.lo || code == c.hi
}

// TestRealRoundTrip encodes random in-range real values and decodes them:
// within half a quantisation step for the integer formats (plus the
// float32 resolution), bit-exact for floats; values beyond full scale
// saturate to the extreme codes and are counted, NaN and Inf floats are
// counted as bad and read as 0 (IEEE 754-2019).
func TestRealRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for _, f := range RealFormats() {
		vals := make([]float32, 1001)
		for i := range vals {
			vals[i] = float32(1.98*rng.Float64() - 0.99)
		}
		raw := make([]byte, len(vals)*f.SampleBytes())
		if c := f.EncodeReal(raw, vals); c != 0 {
			t.Errorf("%s: %d in-range values clipped", f, c)
		}
		back := make([]float32, len(vals))
		if c, b := f.DecodeReal(back, raw); c != 0 || b != 0 {
			t.Errorf("%s: decode clipped %d bad %d", f, c, b)
		}
		tol := 0.0
		if !f.IsFloat() {
			tol = 0.5/integerCodes[f.complexTwin()].scale + 0x1p-24
		}
		for i := range vals {
			if d := math.Abs(float64(back[i] - vals[i])); d > tol {
				t.Fatalf("%s: value %d %g came back %g", f, i, vals[i], back[i])
			}
		}
		// Saturation: ±2 go to the extreme codes, counted both ways.
		over := []float32{2, -2, 0.5}
		raw = make([]byte, 3*f.SampleBytes())
		enc := f.EncodeReal(raw, over)
		dec := make([]float32, 3)
		c, _ := f.DecodeReal(dec, raw)
		if f.IsFloat() {
			if enc != 0 || c != 2 || dec[0] != 2 {
				t.Errorf("%s: floats are written as they are and |x| ≥ 1 counts clipped: enc %d dec %d %v", f, enc, c, dec)
			}
			continue
		}
		if enc != 2 || c != 2 || dec[0] <= 0.99 || dec[1] != -1 {
			t.Errorf("%s: ±2 encoded with %d clipped, decoded %v with %d", f, enc, dec, c)
		}
	}
	nan := float32(math.NaN())
	for _, f := range []Format{RF32LE, RF32BE, RF64LE, RF64BE} {
		raw := make([]byte, 3*f.SampleBytes())
		f.EncodeReal(raw, []float32{nan, 0.25, float32(math.Inf(-1))})
		dec := make([]float32, 3)
		if c, b := f.DecodeReal(dec, raw); b != 2 || c != 0 || dec[0] != 0 || dec[1] != 0.25 || dec[2] != 0 {
			t.Errorf("%s: NaN, 0.25, −Inf decoded %v (clipped %d, bad %d), want 0, 0.25, 0 with 2 bad", f, dec, c, b)
		}
	}
}

// TestRealByteOrder decodes known byte patterns: two's complement 0x4000 =
// 0.5·32768; offset binary 0x8000 = +0.5 code above mid-scale 32767.5;
// IEEE 754-2019 binary32 1.0 = 3F800000, binary64 −0.5 = BFE0000000000000.
func TestRealByteOrder(t *testing.T) {
	cases := []struct {
		f    Format
		hex  string
		want []float32
	}{
		{RI8, "40c0", []float32{0.5, -0.5}},
		{RU8, "ff00", []float32{1, -1}},
		{RI16LE, "004000c0", []float32{0.5, -0.5}},
		{RI16BE, "4000c000", []float32{0.5, -0.5}},
		{RU16LE, "0080", []float32{1.0 / 65535}},
		{RU16BE, "8000", []float32{1.0 / 65535}},
		{RI32LE, "00000040", []float32{0.5}},
		{RI32BE, "c0000000", []float32{-0.5}},
		{RU32BE, "ffffffff", []float32{1}},
		{RF32LE, "0000803f", []float32{1}},
		{RF32BE, "c0000000", []float32{-2}},
		{RF64LE, "000000000000e0bf", []float32{-0.5}},
		{RF64BE, "3ff0000000000000", []float32{1}},
	}
	for _, tc := range cases {
		raw, _ := hex.DecodeString(tc.hex)
		got := make([]float32, len(tc.want))
		tc.f.DecodeReal(got, raw)
		for i := range got {
			if math.Abs(float64(got[i]-tc.want[i])) > 1e-7 {
				t.Errorf("%s: %s decodes to %v, want %v", tc.f, tc.hex, got, tc.want)
			}
		}
		enc := make([]byte, len(raw))
		tc.f.EncodeReal(enc, tc.want)
		if !bytes.Equal(enc, raw) {
			t.Errorf("%s: %v encodes to %x, want %s", tc.f, tc.want, enc, tc.hex)
		}
	}
}

// TestRealCodecPanics: programmer errors panic with the package prefix.
func TestRealCodecPanics(t *testing.T) {
	for name, fn := range map[string]func(){
		"Decode of a real format":      func() { RI8.Decode(make([]complex64, 1), make([]byte, 2)) },
		"Encode of a real format":      func() { RI8.Encode(make([]byte, 2), make([]complex64, 1)) },
		"DecodeReal of complex":        func() { CI8.DecodeReal(make([]float32, 1), make([]byte, 1)) },
		"EncodeReal of complex":        func() { CI8.EncodeReal(make([]byte, 1), make([]float32, 1)) },
		"DecodeReal length":            func() { RI16LE.DecodeReal(make([]float32, 2), make([]byte, 3)) },
		"NewReader of a real format":   func() { NewReader(bytes.NewReader(nil), "x", RI8, 4, 0) },
		"CheckFrontEnd after Next":     func() { r := NewReader(bytes.NewReader(make([]byte, 8)), "x", CI8, 4, 4); r.Next(); r.CheckFrontEnd() },
		"EncodeReal of unknown format": func() { FormatUnknown.EncodeReal(nil, nil) },
	} {
		func() {
			defer func() {
				s, _ := recover().(string)
				if len(s) < 8 || s[:8] != "ingest: " {
					t.Errorf("%s: recovered %q, want an ingest: panic", name, s)
				}
			}()
			fn()
		}()
	}
}
