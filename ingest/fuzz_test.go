package ingest

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"io"
	"math"
	"os"
	"slices"
	"testing"
)

// FuzzParseMeta feeds arbitrary bytes to ParseMeta: it must not panic, and
// whatever it accepts must marshal into a document it accepts again with
// the same content (a rewrite never loses or corrupts metadata). Seeds are
// in testdata/fuzz/FuzzParseMeta plus the example fixture.
func FuzzParseMeta(f *testing.F) {
	if b, err := os.ReadFile(exampleMeta); err == nil {
		f.Add(b)
	}
	f.Add([]byte(metaDoc(okGlobal, `{"core:sample_start": 0, "core:frequency": 1575.42e6, "core:datetime": "2021-06-18T23:17:51.163959Z"}`, "")))
	f.Fuzz(func(t *testing.T, data []byte) {
		m, err := ParseMeta(bytes.NewReader(data))
		if err != nil {
			if m != nil {
				t.Fatalf("ParseMeta returned both %+v and %v", m, err)
			}
			return
		}
		out, err := m.MarshalJSON()
		if err != nil {
			t.Fatalf("MarshalJSON of accepted metadata: %v", err)
		}
		again, err := ParseMeta(bytes.NewReader(out))
		if err != nil {
			t.Fatalf("ParseMeta(MarshalJSON()) failed: %v\ninput: %q\nmarshalled: %s", err, data, out)
		}
		out2, err := again.MarshalJSON()
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(out, out2) {
			t.Fatalf("marshal is not a fixpoint:\n%s\n----\n%s", out, out2)
		}
		if len(again.Captures) != len(m.Captures) || len(again.Annotations) != len(m.Annotations) ||
			again.Global.Datatype != m.Global.Datatype || again.Global.SampleRate != m.Global.SampleRate {
			t.Fatalf("round trip changed the document: %+v vs %+v", m, again)
		}
	})
}

// FuzzDecode decodes arbitrary bytes in every format. Nothing may panic;
// every output is finite; integer formats stay within full scale per
// component, so |x| ≤ √2 (with a 1e-4 margin for float32 rounding), and the
// integer formats of up to 16 bits and cf32 re-encode to the very same
// bytes (their codes are exact in float32, IEEE 754-2019 binary32).
func FuzzDecode(f *testing.F) {
	f.Add(uint8(CI16LE), []byte{0x00, 0x40, 0x00, 0xc0})
	f.Add(uint8(CF32BE), []byte{0x7f, 0xc0, 0, 0, 0x3f, 0x80, 0, 0})
	f.Add(uint8(CU8), []byte{0, 255, 127, 128})
	f.Add(uint8(RI8), []byte{0x80, 0x7f, 3, 0xfd})
	f.Add(uint8(RF64BE), []byte{0x7f, 0xf8, 0, 0, 0, 0, 0, 0})
	f.Fuzz(func(t *testing.T, fi uint8, data []byte) {
		fm := pickFormat(fi)
		sb := fm.SampleBytes()
		n := len(data) / sb
		raw := data[:n*sb]
		if fm.IsReal() {
			fuzzDecodeReal(t, fm, raw, n)
			return
		}
		dst := make([]complex64, n)
		clipped, bad := fm.Decode(dst, raw)
		if clipped < 0 || bad < 0 || clipped+bad > n {
			t.Fatalf("%s: clipped %d bad %d of %d", fm, clipped, bad, n)
		}
		if fm == CI16LE && hasVectorDecode {
			// The vector decoder against its Go twin (see TestVectorDecode).
			useVectorDecode = false
			twin := make([]complex64, n)
			c2, _ := fm.Decode(twin, raw)
			useVectorDecode = true
			if c2 != clipped || !slices.Equal(twin, dst) {
				t.Fatalf("ci16_le: vector decoder (%d clipped) differs from the Go loop (%d clipped)", clipped, c2)
			}
		}
		if !isFloat(fm) && bad != 0 {
			t.Fatalf("%s: integer format reported %d bad samples", fm, bad)
		}
		for i, v := range dst {
			re, im := float64(real(v)), float64(imag(v))
			if math.IsNaN(re) || math.IsNaN(im) || math.IsInf(re, 0) || math.IsInf(im, 0) {
				t.Fatalf("%s: sample %d = %v is not finite", fm, i, v)
			}
			if !isFloat(fm) && math.Hypot(re, im) > 1.0001*math.Sqrt2 {
				t.Fatalf("%s: sample %d = %v beyond √2", fm, i, v)
			}
		}
		lossless := fm == CI8 || fm == CU8 || fm == CI16LE || fm == CI16BE || fm == CU16LE || fm == CU16BE ||
			((fm == CF32LE || fm == CF32BE) && bad == 0)
		if lossless {
			back := make([]byte, len(raw))
			fm.Encode(back, dst)
			if !bytes.Equal(back, raw) {
				t.Fatalf("%s: %x decodes and re-encodes to %x", fm, raw, back)
			}
		}
	})
}

// fuzzDecodeReal checks a real format: DecodeReal must give the complex
// twin's values for whole pairs (the Reader decodes that way), finite
// values, integers within full scale, and the integer formats of up to 16
// bits and rf32 must re-encode to the same bytes.
func fuzzDecodeReal(t *testing.T, fm Format, raw []byte, n int) {
	dst := make([]float32, n)
	clipped, bad := fm.DecodeReal(dst, raw)
	if clipped < 0 || bad < 0 || clipped+bad > n {
		t.Fatalf("%s: clipped %d bad %d of %d", fm, clipped, bad, n)
	}
	if bad == 0 {
		pairs := make([]complex64, n/2)
		fm.complexTwin().Decode(pairs, raw[:n/2*2*fm.SampleBytes()])
		for i, p := range pairs {
			if dst[2*i] != real(p) || dst[2*i+1] != imag(p) {
				t.Fatalf("%s: values %d, %d differ from the twin %s's %v", fm, 2*i, 2*i+1, fm.complexTwin(), p)
			}
		}
	}
	for i, v := range dst {
		if v != v || math.IsInf(float64(v), 0) || (!fm.IsFloat() && math.Abs(float64(v)) > 1.0001) {
			t.Fatalf("%s: value %d = %g", fm, i, v)
		}
	}
	if fm == RI8 || fm == RU8 || fm == RI16LE || fm == RI16BE || fm == RU16LE || fm == RU16BE || ((fm == RF32LE || fm == RF32BE) && bad == 0) {
		back := make([]byte, len(raw))
		fm.EncodeReal(back, dst)
		if !bytes.Equal(back, raw) {
			t.Fatalf("%s: %x decodes and re-encodes to %x", fm, raw, back)
		}
	}
}

// FuzzReader streams arbitrary bytes through NewReader (complex formats)
// or NewIFReader (real ones, at an IF of fs/4 or through the NCO, either
// LO side) with an unknown or a given total. It must not panic, every
// error must be a *CaptureError, blocks must be contiguous, and a clean
// end means all whole samples were delivered (half the real ones, rounded
// down) and every byte hashed (SHA-256, FIPS 180-4, via crypto/sha256).
func FuzzReader(f *testing.F) {
	f.Add(uint8(CI16LE), uint16(3), int16(-1), []byte("0123456789abcdef0123"))
	f.Add(uint8(CF32LE), uint16(1), int16(2), []byte{0, 0, 0x80, 0x7f, 0, 0, 0, 0})
	f.Add(uint8(RI8), uint16(2), int16(7), []byte("0123456"))
	f.Add(uint8(RF32BE), uint16(70), int16(-3), []byte("0123456789abcdef0123"))
	f.Fuzz(func(t *testing.T, fi uint8, block uint16, total int16, data []byte) {
		fm := pickFormat(fi)
		sb := fm.SampleBytes()
		bs := 1 + int(block)%512
		var r *Reader
		out := int64(total) // complex samples expected at a clean end
		if fm.IsReal() {
			conv := IFConversion{1e6, LowSide}
			if block&512 != 0 {
				conv = IFConversion{0.93e6, HighSide}
			}
			var err error
			r, err = NewIFReader(bytes.NewReader(data), "fuzz", fm, bs, int64(total), 4e6, conv)
			if err != nil {
				t.Fatal(err)
			}
			out = int64(total) / 2
		} else {
			r = NewReader(bytes.NewReader(data), "fuzz", fm, bs, int64(total))
		}
		defer r.Close()
		var next int64
		for range len(data) + 2 {
			b, err := r.Next()
			if err == io.EOF {
				if fm.IsReal() && total < 0 && len(data)%sb == 0 {
					out = int64(len(data)/sb) / 2
				}
				if total >= 0 && next != out {
					t.Fatalf("clean end after %d samples, want %d (total %d)", next, out, total)
				}
				if total < 0 && !fm.IsReal() && (len(data)%sb != 0 || next != int64(len(data)/sb)) {
					t.Fatalf("clean end after %d samples of %d bytes (%d per sample)", next, len(data), sb)
				}
				if total < 0 && fm.IsReal() && (len(data)%sb != 0 || next != out) {
					t.Fatalf("clean end after %d samples of %d bytes (%d per real sample)", next, len(data), sb)
				}
				if total >= 0 && int64(len(data)) != int64(total)*int64(sb) {
					t.Fatalf("clean end with %d bytes, want exactly %d", len(data), int(total)*sb)
				}
				if fm.IsReal() {
					sum := sha256.Sum256(data)
					if r.SHA256() != hex.EncodeToString(sum[:]) {
						t.Fatalf("SHA256 %s, want %x", r.SHA256(), sum)
					}
					return
				}
				sum := sha256.Sum256(data[:next*int64(sb)])
				if r.SHA256() != hex.EncodeToString(sum[:]) {
					t.Fatalf("SHA256 %s, want %x", r.SHA256(), sum)
				}
				return
			}
			if err != nil {
				var ce *CaptureError
				if !errors.As(err, &ce) || ce.File != "fuzz" {
					t.Fatalf("error %v (%T) is not a *CaptureError for the stream", err, err)
				}
				return
			}
			if b.Start != next || len(b.Samples) == 0 || len(b.Samples) > bs {
				t.Fatalf("block Start %d len %d, want Start %d and 1..%d samples", b.Start, len(b.Samples), next, bs)
			}
			next += int64(len(b.Samples))
		}
		t.Fatalf("no end after %d calls of Next", len(data)+2)
	})
}

// pickFormat maps a fuzz byte to a format: valid Format values are
// themselves, anything else wraps round the list of complex and real ones.
func pickFormat(fi uint8) Format {
	if f := Format(fi); f.Valid() {
		return f
	}
	formats := append(Formats(), RealFormats()...)
	return formats[int(fi)%len(formats)]
}
