package ingest

import (
	"bytes"
	"encoding/binary"
	"encoding/hex"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"strings"
	"testing"
)

// codeRange is the integer code range of an integer format and its
// quantisation step (one code, in full-scale units): two's complement for
// ci*, offset binary for cu* (SigMF 1.2.6 datatype table: ci = signed
// integer, cu = unsigned integer; full scale mapping is common practice,
// see the Format doc).
type codeRange struct {
	lo, hi        float64 // most negative and most positive code
	scale, offset float64 // value = (code − offset)/scale
}

// integerCodes is written out here from the two's-complement and
// offset-binary definitions rather than taken from format.go.
var integerCodes = map[Format]codeRange{
	CI8:    {-128, 127, 128, 0},
	CU8:    {0, 255, 127.5, 127.5},
	CI16LE: {-32768, 32767, 32768, 0},
	CI16BE: {-32768, 32767, 32768, 0},
	CU16LE: {0, 65535, 32767.5, 32767.5},
	CU16BE: {0, 65535, 32767.5, 32767.5},
	CI32LE: {-2147483648, 2147483647, 2147483648, 0},
	CI32BE: {-2147483648, 2147483647, 2147483648, 0},
	CU32LE: {0, 4294967295, 2147483647.5, 2147483647.5},
	CU32BE: {0, 4294967295, 2147483647.5, 2147483647.5},
}

func isFloat(f Format) bool { return f >= CF32LE && f <= CF64BE }

// TestFormatsAndSampleBytes checks the list of formats against the SigMF
// datatype grammar: width is per component and a complex sample holds I
// and Q (SigMF 1.2.6 additional_content.md, "Dataset Format").
func TestFormatsAndSampleBytes(t *testing.T) {
	want := []struct {
		name  string
		bytes int
	}{
		{"ci8", 2}, {"cu8", 2},
		{"ci16_le", 4}, {"ci16_be", 4}, {"cu16_le", 4}, {"cu16_be", 4},
		{"ci32_le", 8}, {"ci32_be", 8},
		{"cf32_le", 8}, {"cf32_be", 8}, {"cf64_le", 16}, {"cf64_be", 16},
		{"cu32_le", 8}, {"cu32_be", 8},
	}
	got := Formats()
	if len(got) != len(want) {
		t.Fatalf("Formats() has %d entries, want %d", len(got), len(want))
	}
	for i, w := range want {
		f := got[i]
		if f.String() != w.name || f.SampleBytes() != w.bytes || !f.Valid() || f.IsReal() {
			t.Errorf("Formats()[%d] = %q (%d bytes, valid %v), want %q (%d bytes)", i, f, f.SampleBytes(), f.Valid(), w.name, w.bytes)
		}
	}
	// The real twins: one value per sample, so half the bytes; 14 names,
	// which with the 14 complex ones are the 28 of the SigMF grammar.
	reals := RealFormats()
	if len(reals) != len(want) {
		t.Fatalf("RealFormats() has %d entries, want %d", len(reals), len(want))
	}
	for i, w := range want {
		f := reals[i]
		if f.String() != "r"+w.name[1:] || f.SampleBytes() != w.bytes/2 || !f.Valid() || !f.IsReal() {
			t.Errorf("RealFormats()[%d] = %q (%d bytes, valid %v, real %v), want %q (%d bytes)", i, f, f.SampleBytes(), f.Valid(), f.IsReal(), "r"+w.name[1:], w.bytes/2)
		}
	}
	if FormatUnknown.Valid() || Format(200).Valid() || Format(200).SampleBytes() != 0 || Format(200).String() != "unknown" {
		t.Error("out-of-range Format must be invalid, 0 bytes, \"unknown\"")
	}
}

// TestRoundTrip encodes random in-range samples and decodes them again:
// integer formats come back within half a quantisation step (rounding to
// the nearest code: 1/128 per step for ci8, 1/127.5 for cu8, 1/32768 for
// ci16, 1/32767.5 for cu16, 2^-31 for ci32 plus the float32 resolution
// 2^-24 of complex64), floats come back bit-exact (IEEE 754-2019 binary32
// holds every float32; binary64 holds every float32 exactly).
func TestRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	const n = 4096
	for _, f := range Formats() {
		t.Run(f.String(), func(t *testing.T) {
			src := make([]complex64, n)
			var tol float64
			if isFloat(f) {
				for i := range src {
					src[i] = complex(float32(2*rng.Float64()-1), float32(2*rng.Float64()-1))
				}
			} else {
				c := integerCodes[f]
				// Draw codes strictly inside [lo, hi] so nothing saturates.
				val := func() float32 {
					code := c.lo + 1 + rng.Float64()*(c.hi-c.lo-2)
					return float32((code - c.offset) / c.scale)
				}
				for i := range src {
					src[i] = complex(val(), val())
				}
				tol = 0.5/c.scale + 0x1p-24
			}
			raw := make([]byte, n*f.SampleBytes())
			if clipped := f.Encode(raw, src); clipped != 0 {
				t.Fatalf("Encode clipped %d in-range samples", clipped)
			}
			dst := make([]complex64, n)
			clipped, bad := f.Decode(dst, raw)
			if clipped != 0 || bad != 0 {
				t.Fatalf("Decode: clipped %d bad %d, want 0 0", clipped, bad)
			}
			var worst float64
			for i := range src {
				dr := math.Abs(float64(real(dst[i])) - float64(real(src[i])))
				di := math.Abs(float64(imag(dst[i])) - float64(imag(src[i])))
				worst = max(worst, dr, di)
			}
			if worst > tol {
				t.Errorf("largest round-trip error %g, want ≤ %g", worst, tol)
			}
			if !isFloat(f) {
				// The error must also use most of the half step: a coarser
				// quantiser than the format's (e.g. 8 bits in a 16-bit
				// format) would show as a much larger error, a finer one as
				// a much smaller one.
				if c := integerCodes[f]; c.scale < 1<<20 && worst < 0.4/c.scale {
					t.Errorf("largest round-trip error %g is far below half a step %g: quantiser not the format's", worst, 0.5/c.scale)
				}
			}
		})
	}
}

// TestSaturation checks that values beyond full scale go to the extreme
// codes of the format (two's complement: 0x7F.../0x80...; offset binary:
// all ones/all zeros), never wrap round to the opposite sign, and that
// the count of clipped samples is exact, both from Encode and from Decode
// of the result.
func TestSaturation(t *testing.T) {
	inf := float32(math.Inf(1))
	// Samples 1, 2, 4, 5 and 6 have a component beyond full scale.
	src := []complex64{
		complex(0.5, -0.25),
		complex(2, 0),
		complex(0.1, 0.2),
		complex(-0.3, -3.5),
		complex(1e30, -1e30),
		complex(inf, -inf),
		complex(-1.25, 0.75),
		complex(-0.9, 0.9),
	}
	wantClipped := 5
	for _, f := range Formats() {
		if isFloat(f) {
			continue
		}
		t.Run(f.String(), func(t *testing.T) {
			raw := make([]byte, len(src)*f.SampleBytes())
			if got := f.Encode(raw, src); got != wantClipped {
				t.Errorf("Encode clipped = %d, want %d", got, wantClipped)
			}
			dst := make([]complex64, len(src))
			clipped, bad := f.Decode(dst, raw)
			if clipped != wantClipped || bad != 0 {
				t.Errorf("Decode clipped, bad = %d, %d, want %d, 0", clipped, bad, wantClipped)
			}
			c := integerCodes[f]
			top := float32((c.hi - c.offset) / c.scale)
			bottom := float32((c.lo - c.offset) / c.scale)
			for i, s := range src {
				for _, p := range [][2]float32{{real(s), real(dst[i])}, {imag(s), imag(dst[i])}} {
					in, out := p[0], p[1]
					switch {
					case in > 1:
						if math.Abs(float64(out-top)) > 1e-6 || out <= 0 {
							t.Errorf("sample %d: %g decoded as %g, want the top code %g", i, in, out, top)
						}
					case in < -1:
						if math.Abs(float64(out-bottom)) > 1e-6 || out >= 0 {
							t.Errorf("sample %d: %g decoded as %g, want the bottom code %g", i, in, out, bottom)
						}
					}
				}
			}
		})
	}

	// The extreme codes as bytes, for the sample 2 − 2i.
	codes := []struct {
		f    Format
		want string
	}{
		{CI8, "7f80"},                // int8 127, −128
		{CU8, "ff00"},                // uint8 255, 0
		{CI16LE, "ff7f0080"},         // int16 32767, −32768 little-endian
		{CI16BE, "7fff8000"},         // big-endian
		{CU16LE, "ffff0000"},         // uint16 65535, 0
		{CI32LE, "ffffff7f00000080"}, // int32 2^31−1, −2^31 little-endian
		{CI32BE, "7fffffff80000000"},
		{CU32LE, "ffffffff00000000"}, // uint32 2^32−1, 0
		{CU32BE, "ffffffff00000000"},
	}
	for _, tc := range codes {
		raw := make([]byte, tc.f.SampleBytes())
		tc.f.Encode(raw, []complex64{complex(2, -2)})
		if got := hex.EncodeToString(raw); got != tc.want {
			t.Errorf("%s: 2−2i encoded as %s, want %s", tc.f, got, tc.want)
		}
	}
}

// TestCU8Centre checks the offset-binary convention for 8-bit unsigned IQ
// (common practice for the 8-bit output of consumer tuner dongles, from
// memory): mid-scale 127.5, so code 0 is −1.0 and code 255 is +1.0
// exactly, and codes 127 and 128 sit symmetrically at ∓1/255.
func TestCU8Centre(t *testing.T) {
	cases := []struct {
		code byte
		want float32
	}{
		{0, -1}, {255, 1}, {127, -1.0 / 255}, {128, 1.0 / 255}, {64, (64 - 127.5) / 127.5},
	}
	for _, tc := range cases {
		dst := make([]complex64, 1)
		CU8.Decode(dst, []byte{tc.code, 255 - tc.code})
		if d := math.Abs(float64(real(dst[0]) - tc.want)); d > 1e-7 {
			t.Errorf("cu8 code %d decodes to %g, want %g", tc.code, real(dst[0]), tc.want)
		}
		// Offset binary is antisymmetric about 127.5: code 255−c is −value(c).
		if real(dst[0]) != -imag(dst[0]) {
			t.Errorf("cu8 codes %d and %d decode to %g and %g, want opposite values", tc.code, 255-tc.code, real(dst[0]), imag(dst[0]))
		}
	}
	if real(decodeOne(CU8, []byte{0, 0})) != -1 || real(decodeOne(CU8, []byte{255, 0})) != 1 {
		t.Error("cu8 codes 0 and 255 must decode to exactly −1 and +1")
	}
}

func decodeOne(f Format, b []byte) complex64 {
	dst := make([]complex64, 1)
	f.Decode(dst, b)
	return dst[0]
}

// TestByteOrder decodes known byte patterns and encodes the values back:
// two's complement 0x4000 = 16384 = 0.5·32768 and 0xC000 = −16384;
// IEEE 754-2019 binary32 1.0 = 3F800000, −2.0 = C0000000; binary64
// 1.0 = 3FF0000000000000, −0.5 = BFE0000000000000.
func TestByteOrder(t *testing.T) {
	cases := []struct {
		f    Format
		hex  string
		want complex64
	}{
		{CI8, "40c0", complex(0.5, -0.5)},
		{CU8, "ff00", complex(1, -1)},
		{CI16LE, "004000c0", complex(0.5, -0.5)},
		{CI16BE, "4000c000", complex(0.5, -0.5)},
		// offset binary: 0x8000 = 32768 → +0.5/32767.5, 0x7FFF → −0.5/32767.5
		{CU16LE, "0080ff7f", complex(1.0/65535, -1.0/65535)},
		{CU16BE, "80007fff", complex(1.0/65535, -1.0/65535)},
		{CI32LE, "00000040000000c0", complex(0.5, -0.5)},
		{CI32BE, "40000000c0000000", complex(0.5, -0.5)},
		// offset binary: 0x80000000 = 2^31 → +0.5/(2^31 − 0.5), 0x7FFFFFFF → −0.5/(2^31 − 0.5)
		{CU32LE, "00000080ffffff7f", complex(0.5/2147483647.5, -0.5/2147483647.5)},
		{CU32BE, "800000007fffffff", complex(0.5/2147483647.5, -0.5/2147483647.5)},
		{CF32LE, "0000803f000000c0", complex(1, -2)},
		{CF32BE, "3f800000c0000000", complex(1, -2)},
		{CF64LE, "000000000000f03f000000000000e0bf", complex(1, -0.5)},
		{CF64BE, "3ff0000000000000bfe0000000000000", complex(1, -0.5)},
	}
	for _, tc := range cases {
		raw, _ := hex.DecodeString(tc.hex)
		got := decodeOne(tc.f, raw)
		if cmplx.Abs(complex128(got-tc.want)) > 1e-9 {
			t.Errorf("%s: %s decodes to %v, want %v", tc.f, tc.hex, got, tc.want)
		}
		enc := make([]byte, tc.f.SampleBytes())
		tc.f.Encode(enc, []complex64{tc.want})
		if !bytes.Equal(enc, raw) {
			t.Errorf("%s: %v encodes to %x, want %s", tc.f, tc.want, enc, tc.hex)
		}
	}
}

// TestNonFinite checks that NaN and ±Inf float samples are counted in bad
// and replaced by 0 (IEEE 754-2019: exponent all ones), while finite
// components of magnitude ≥ 1 count as clipped.
func TestNonFinite(t *testing.T) {
	nan, inf := float32(math.NaN()), float32(math.Inf(1))
	src := []complex64{
		complex(nan, 0),
		complex(0.5, 0.5),
		complex(1, inf),
		complex(-inf, -inf),
		complex(0.25, -1), // clipped: |Q| = 1
		complex(-0.75, nan),
		complex(-1e-3, 1e-3),
	}
	for _, f := range []Format{CF32LE, CF32BE, CF64LE, CF64BE} {
		raw := make([]byte, len(src)*f.SampleBytes())
		if c := f.Encode(raw, src); c != 0 {
			t.Errorf("%s: Encode clipped %d; floats are written as they are", f, c)
		}
		dst := make([]complex64, len(src))
		clipped, bad := f.Decode(dst, raw)
		if bad != 4 || clipped != 1 {
			t.Errorf("%s: clipped, bad = %d, %d, want 1, 4", f, clipped, bad)
		}
		for _, i := range []int{0, 2, 3, 5} {
			if dst[i] != 0 {
				t.Errorf("%s: non-finite sample %d decoded as %v, want 0", f, i, dst[i])
			}
		}
		if dst[1] != src[1] || dst[6] != src[6] {
			t.Errorf("%s: finite samples changed: %v %v", f, dst[1], dst[6])
		}
	}
	// A finite binary64 beyond the binary32 range (largest finite
	// binary32 ≈ 3.4028235e38, IEEE 754-2019) must not become Inf.
	for _, f := range []Format{CF64LE, CF64BE} {
		raw := make([]byte, 16)
		bo := []func([]byte, uint64){leBits, beBits}[f-CF64LE]
		bo(raw[0:], math.Float64bits(1e300))
		bo(raw[8:], math.Float64bits(-math.MaxFloat64))
		dst := make([]complex64, 1)
		clipped, bad := f.Decode(dst, raw)
		if clipped != 1 || bad != 0 || real(dst[0]) != math.MaxFloat32 || imag(dst[0]) != -math.MaxFloat32 {
			t.Errorf("%s: 1e300 − 1.8e308i decoded as %v (clipped %d, bad %d), want ±MaxFloat32, clipped", f, dst[0], clipped, bad)
		}
	}
	// The quiet NaN pattern of binary32 (IEEE 754-2019) as raw bytes.
	raw, _ := hex.DecodeString("7fc000003f000000")
	dst := make([]complex64, 1)
	if _, bad := CF32BE.Decode(dst, raw); bad != 1 {
		t.Errorf("cf32_be 7FC00000 (NaN) not counted as bad")
	}
}

// TestParseFormat checks the datatype names of the SigMF 1.2.6 ABNF
// (additional_content.md): endianness mandatory for multi-byte types,
// absent for 8-bit ones, "r" for real and "c" for complex.
func TestParseFormat(t *testing.T) {
	accepted := map[string]Format{
		"ci8": CI8, "cu8": CU8, "ci16_le": CI16LE, "ci16_be": CI16BE, "cu16_le": CU16LE, "cu16_be": CU16BE,
		"ci32_le": CI32LE, "ci32_be": CI32BE, "cf32_le": CF32LE, "cf32_be": CF32BE, "cf64_le": CF64LE, "cf64_be": CF64BE,
		"cu32_le": CU32LE, "cu32_be": CU32BE,
		"ri8": RI8, "ru8": RU8, "ri16_le": RI16LE, "ri16_be": RI16BE, "ru16_le": RU16LE, "ru16_be": RU16BE,
		"ri32_le": RI32LE, "ri32_be": RI32BE, "ru32_le": RU32LE, "ru32_be": RU32BE,
		"rf32_le": RF32LE, "rf32_be": RF32BE, "rf64_le": RF64LE, "rf64_be": RF64BE,
	}
	for s, want := range accepted {
		got, err := ParseFormat(s)
		if err != nil || got != want {
			t.Errorf("ParseFormat(%q) = %v, %v, want %v", s, got, err, want)
		}
		if want.String() != s {
			t.Errorf("%v.String() = %q, want %q", want, want.String(), s)
		}
	}
	rejected := []struct {
		in   string
		want []string // substrings of the error
	}{
		{"cf32", []string{`"cf32"`, "endianness"}},
		{"ci16", []string{"endianness"}},
		{"ci8_le", []string{"8-bit", "no endianness suffix", `"ci8"`}},
		{"cu8_be", []string{"8-bit", `"cu8"`}},
		{"rf32", []string{`"rf32"`, "endianness"}},
		{"ri16", []string{"endianness"}},
		{"ri8_le", []string{"8-bit", `"ri8"`}},
		{"ru8_be", []string{"8-bit", `"ru8"`}},
		{"", []string{"no datatype"}},
		{"garbage", []string{"unknown datatype", `"garbage"`, "supported", "ci16_le"}},
		// Starts with "r" but is no SigMF real type: garbage, not "real".
		{"rubbish", []string{"unknown datatype", `"rubbish"`}},
		{"CI16_LE", []string{"unknown datatype"}},
		{"cf32_le ", []string{"unknown datatype"}},
		{"cf16_le", []string{"unknown datatype"}},
	}
	for _, tc := range rejected {
		f, err := ParseFormat(tc.in)
		if err == nil || f != FormatUnknown {
			t.Errorf("ParseFormat(%q) = %v, %v, want an error", tc.in, f, err)
			continue
		}
		for _, sub := range tc.want {
			if !strings.Contains(err.Error(), sub) {
				t.Errorf("ParseFormat(%q) error %q does not mention %q", tc.in, err, sub)
			}
		}
	}
}

// TestFormatForExtension checks raw-file extensions: the SigMF 1.2.6
// datatype names themselves and the short forms of DESIGN.md "Inputs"
// (.ci8, .cu8, .ci16, .cf32), which mean little-endian.
func TestFormatForExtension(t *testing.T) {
	cases := []struct {
		ext  string
		want Format
		ok   bool
	}{
		{".cf32", CF32LE, true}, // short raw-file forms mean little-endian
		{".ci16", CI16LE, true},
		{".cu16", CU16LE, true},
		{".ci32", CI32LE, true},
		{".cf64", CF64LE, true},
		{".ci8", CI8, true},
		{".cu8", CU8, true},
		{".CU8", CU8, true},
		{".CF32", CF32LE, true},
		{".ci16_be", CI16BE, true},
		{".cf32_be", CF32BE, true},
		{"cf32_le", CF32LE, true},
		{".bin", FormatUnknown, false},
		{".sigmf-data", FormatUnknown, false},
		{".rf32_le", RF32LE, true},
		{".ri8", RI8, true},
		{".ri16", RI16LE, true},
		{".rf32", RF32LE, true},
		{".cu32", CU32LE, true},
		// Endings of other recorders (FormatForExtension doc): not SigMF
		// names, little-endian.
		{".cs8", CI8, true},
		{".cs16", CI16LE, true},
		{".sc16", CI16LE, true},
		{".CS16", CI16LE, true},
		{".fc32", CF32LE, true},
		{".dat", FormatUnknown, false},
		{".iq", FormatUnknown, false},
		{".ci8_le", FormatUnknown, false},
		{"", FormatUnknown, false},
	}
	for _, tc := range cases {
		got, ok := FormatForExtension(tc.ext)
		if got != tc.want || ok != tc.ok {
			t.Errorf("FormatForExtension(%q) = %v, %v, want %v, %v", tc.ext, got, ok, tc.want, tc.ok)
		}
	}
}

// TestFullScaleTone checks the dBFS convention: a complex tone e^{jωn} of
// amplitude A decodes to mean |x|² = A², so a full-scale tone is 0 dBFS
// and a half-scale one −6.02 dBFS (common practice: full scale = the
// largest code magnitude; 20·log10(1/2) = −6.0206 dB). The tolerance is
// the power error of the quantisation plus the one-code saturation of
// the top code: about 2·A·step per sample at worst.
func TestFullScaleTone(t *testing.T) {
	const n = 8192
	omega := 2 * math.Pi * 0.1234567
	cases := []struct {
		f    Format
		amp  float64
		step float64
	}{
		{CI16LE, 1, 1.0 / 32768},
		{CI16BE, 0.5, 1.0 / 32768},
		{CI8, 1, 1.0 / 128},
		{CU8, 1, 1.0 / 127.5},
		{CF32LE, 1, 1e-7},
	}
	for _, tc := range cases {
		src := make([]complex64, n)
		for i := range src {
			s, c := math.Sincos(omega * float64(i))
			src[i] = complex(float32(tc.amp*c), float32(tc.amp*s))
		}
		raw := make([]byte, n*tc.f.SampleBytes())
		tc.f.Encode(raw, src)
		dst := make([]complex64, n)
		tc.f.Decode(dst, raw)
		var p float64
		for _, v := range dst {
			p += float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
		}
		p /= n
		want := tc.amp * tc.amp
		if math.Abs(p-want) > 2*tc.amp*tc.step {
			t.Errorf("%s amplitude %g: mean |x|² = %.7f (%.4f dBFS), want %.7f (%.4f dBFS)",
				tc.f, tc.amp, p, 10*math.Log10(p), want, 10*math.Log10(want))
		}
	}
}

// TestCodecPanics checks that programmer errors (length mismatches, an
// unknown format) panic with the package prefix (house rule: panics only
// for programmer errors, "pkgname:" prefix).
func TestCodecPanics(t *testing.T) {
	cases := []struct {
		name string
		fn   func()
	}{
		{"decode short src", func() { CI16LE.Decode(make([]complex64, 2), make([]byte, 7)) }},
		{"encode short dst", func() { CF32LE.Encode(make([]byte, 15), make([]complex64, 2)) }},
		{"decode unknown", func() { FormatUnknown.Decode(nil, nil) }},
		{"encode unknown", func() { FormatUnknown.Encode(nil, nil) }},
	}
	for _, tc := range cases {
		func() {
			defer func() {
				r := recover()
				s, _ := r.(string)
				if !strings.HasPrefix(s, "ingest: ") {
					t.Errorf("%s: recovered %v, want a panic with the ingest: prefix", tc.name, r)
				}
			}()
			tc.fn()
		}()
	}
}

func leBits(b []byte, v uint64) { binary.LittleEndian.PutUint64(b, v) }
func beBits(b []byte, v uint64) { binary.BigEndian.PutUint64(b, v) }
