package ingest

import (
	"encoding/binary"
	"fmt"
	"math"
	"regexp"
	"strings"
)

// Format is a sample format, named as SigMF names its datatypes (SigMF
// core:datatype, e.g. "ci16_le"): complex ones (c...) interleave I then Q,
// each component of the given width and endianness; real ones (r...) hold
// one real value per sample, as an IF sampler writes them (turned into
// complex baseband by the Reader, see IFConversion).
//
// Decoding maps full scale to 1.0 so that power in dBFS is
// 10·log10(mean |x|²): signed integers are divided by 2^(bits−1), unsigned
// (offset binary) ones have their mid-scale subtracted and are divided by it
// (cu8: (v − 127.5)/127.5), floats are taken as they are.
type Format uint8

// The supported formats.
const (
	FormatUnknown Format = iota
	CI8                  // signed 8-bit
	CU8                  // offset-binary 8-bit, mid-scale 127.5
	CI16LE               // signed 16-bit little-endian
	CI16BE               // signed 16-bit big-endian
	CU16LE               // offset-binary 16-bit little-endian, mid-scale 32767.5
	CU16BE               // offset-binary 16-bit big-endian
	CI32LE               // signed 32-bit little-endian
	CI32BE               // signed 32-bit big-endian
	CF32LE               // IEEE-754 binary32 little-endian
	CF32BE               // IEEE-754 binary32 big-endian
	CF64LE               // IEEE-754 binary64 little-endian
	CF64BE               // IEEE-754 binary64 big-endian
	CU32LE               // offset-binary 32-bit little-endian, mid-scale 2147483647.5
	CU32BE               // offset-binary 32-bit big-endian
	RI8                  // real, signed 8-bit
	RU8                  // real, offset-binary 8-bit, mid-scale 127.5
	RI16LE               // real, signed 16-bit little-endian
	RI16BE               // real, signed 16-bit big-endian
	RU16LE               // real, offset-binary 16-bit little-endian
	RU16BE               // real, offset-binary 16-bit big-endian
	RI32LE               // real, signed 32-bit little-endian
	RI32BE               // real, signed 32-bit big-endian
	RF32LE               // real, IEEE-754 binary32 little-endian
	RF32BE               // real, IEEE-754 binary32 big-endian
	RF64LE               // real, IEEE-754 binary64 little-endian
	RF64BE               // real, IEEE-754 binary64 big-endian
	RU32LE               // real, offset-binary 32-bit little-endian
	RU32BE               // real, offset-binary 32-bit big-endian
	numFormats
)

// firstReal is the first real format: CI8..CF64BE are complex,
// RI8..RF64BE real.
const firstReal = RI8

var formatNames = [numFormats]string{
	FormatUnknown: "unknown",
	CI8:           "ci8",
	CU8:           "cu8",
	CI16LE:        "ci16_le",
	CI16BE:        "ci16_be",
	CU16LE:        "cu16_le",
	CU16BE:        "cu16_be",
	CI32LE:        "ci32_le",
	CI32BE:        "ci32_be",
	CF32LE:        "cf32_le",
	CF32BE:        "cf32_be",
	CF64LE:        "cf64_le",
	CF64BE:        "cf64_be",
	CU32LE:        "cu32_le",
	CU32BE:        "cu32_be",
	RI8:           "ri8",
	RU8:           "ru8",
	RI16LE:        "ri16_le",
	RI16BE:        "ri16_be",
	RU16LE:        "ru16_le",
	RU16BE:        "ru16_be",
	RI32LE:        "ri32_le",
	RI32BE:        "ri32_be",
	RF32LE:        "rf32_le",
	RF32BE:        "rf32_be",
	RF64LE:        "rf64_le",
	RF64BE:        "rf64_be",
	RU32LE:        "ru32_le",
	RU32BE:        "ru32_be",
}

var componentBytes = [numFormats]int{0, 1, 1, 2, 2, 2, 2, 4, 4, 4, 4, 8, 8, 4, 4, 1, 1, 2, 2, 2, 2, 4, 4, 4, 4, 8, 8, 4, 4}

// Formats lists the complex formats, in a stable order.
func Formats() []Format {
	out := make([]Format, 0, firstReal-1)
	for f := CI8; f < firstReal; f++ {
		out = append(out, f)
	}
	return out
}

// RealFormats lists the real-valued formats, in a stable order (the same
// as Formats: each is the real twin of the complex format at the same
// place).
func RealFormats() []Format {
	out := make([]Format, 0, numFormats-firstReal)
	for f := firstReal; f < numFormats; f++ {
		out = append(out, f)
	}
	return out
}

// IsReal reports whether f is a real-valued format (SigMF "r...").
func (f Format) IsReal() bool { return f >= firstReal && f < numFormats }

// IsFloat reports whether f holds IEEE-754 floats (cf32, cf64, rf32, rf64).
func (f Format) IsFloat() bool {
	switch f {
	case CF32LE, CF32BE, CF64LE, CF64BE, RF32LE, RF32BE, RF64LE, RF64BE:
		return true
	}
	return false
}

// complexTwin maps a real format to the complex one with the same
// component type (RI16LE → CI16LE); a complex format maps to itself.
func (f Format) complexTwin() Format {
	if f.IsReal() {
		return f - firstReal + CI8
	}
	return f
}

// ComponentBytes is the size of one component (I, Q or a real value) in
// bytes.
func (f Format) ComponentBytes() int {
	if f >= numFormats {
		return 0
	}
	return componentBytes[f]
}

// String returns the SigMF datatype name of f.
func (f Format) String() string {
	if f >= numFormats {
		return "unknown"
	}
	return formatNames[f]
}

// SampleBytes is the size of one sample of the file in bytes: a complex
// sample (I and Q) for complex formats, one real value for real ones.
func (f Format) SampleBytes() int {
	if f >= numFormats {
		return 0
	}
	if f.IsReal() {
		return componentBytes[f]
	}
	return 2 * componentBytes[f]
}

// Valid reports whether f is a supported format.
func (f Format) Valid() bool { return f > FormatUnknown && f < numFormats }

// ParseFormat parses a SigMF datatype, complex ("ci16_le", "cu8",
// "cf32_be", ...) or real ("ri8", "ri16_le", "rf32_le", ...). The
// endianness suffix is mandatory for multi-byte types and absent for 8-bit
// ones, as the SigMF datatype grammar requires.
func ParseFormat(s string) (Format, error) {
	for f := CI8; f < numFormats; f++ {
		if s == formatNames[f] {
			return f, nil
		}
	}
	switch {
	case s == "":
		return FormatUnknown, fmt.Errorf("no datatype given")
	case eightBitSuffixed.MatchString(s):
		return FormatUnknown, fmt.Errorf("datatype %q: 8-bit types take no endianness suffix (SigMF), use %q", s, s[:3])
	case unsuffixed.MatchString(s):
		return FormatUnknown, fmt.Errorf("datatype %q lacks the _le/_be endianness suffix SigMF requires", s)
	}
	return FormatUnknown, fmt.Errorf("unknown datatype %q (supported: %s)", s, supportedList())
}

var (
	eightBitSuffixed = regexp.MustCompile(`^[cr][iu]8_(le|be)$`)
	unsuffixed       = regexp.MustCompile(`^[cr](i16|u16|i32|u32|f32|f64)$`)
)

func supportedList() string {
	names := make([]string, 0, numFormats-1)
	for f := CI8; f < numFormats; f++ {
		names = append(names, f.String())
	}
	return strings.Join(names, ", ")
}

// FormatForExtension maps a raw-file extension to its format: the SigMF
// datatype names themselves (".ci16_le", ".ri8"); the short forms ".ci16",
// ".cu16", ".ci32", ".cf32", ".cf64" and their real twins (".ri16" ...),
// which mean little-endian; and the endings other recorders commonly give
// raw IQ (common practice, from memory): ".cs8" (complex signed 8-bit) →
// ci8, ".cs16" and ".sc16" (complex signed 16-bit) → ci16_le, ".fc32"
// (complex float 32-bit) → cf32_le. None of these four is a SigMF datatype
// (the grammar has no "s" type and puts the c first), so none can mean
// anything else to a SigMF reader; the little-endian reading is what the
// little-endian hosts that write them produce. The boolean is false for an
// extension that names no format.
func FormatForExtension(ext string) (Format, bool) {
	ext = strings.TrimPrefix(strings.ToLower(ext), ".")
	switch ext {
	case "ci16", "cu16", "ci32", "cu32", "cf32", "cf64", "ri16", "ru16", "ri32", "ru32", "rf32", "rf64":
		ext += "_le"
	case "cs8":
		ext = "ci8"
	case "cs16", "sc16":
		ext = "ci16_le"
	case "fc32":
		ext = "cf32_le"
	}
	f, err := ParseFormat(ext)
	return f, err == nil
}

// fullScale returns the integer full scale and mid-scale offset of f.
func (f Format) scale() (scale, offset float64) {
	switch f {
	case CI8:
		return 128, 0
	case CU8:
		return 127.5, 127.5
	case CI16LE, CI16BE:
		return 32768, 0
	case CU16LE, CU16BE:
		return 32767.5, 32767.5
	case CI32LE, CI32BE:
		return 2147483648, 0
	case CU32LE, CU32BE:
		return 2147483647.5, 2147483647.5
	}
	return 1, 0
}

// Decode converts len(dst) complex samples from src (which must hold
// exactly len(dst)·SampleBytes bytes) into dst, scaled to full scale 1.0.
// It returns the number of samples whose I or Q sits at the format's most
// negative or most positive code (ADC saturation); for floats, a component
// with magnitude ≥ 1 counts as clipped, and a cf64 one beyond the float32
// range is saturated to ±math.MaxFloat32. NaN and Inf floats are replaced
// by 0 and counted in bad.
func (f Format) Decode(dst []complex64, src []byte) (clipped, bad int) {
	if f.IsReal() {
		panic("ingest: Decode of a real format (use DecodeReal)")
	}
	if len(src) != len(dst)*f.SampleBytes() {
		panic("ingest: Decode length mismatch")
	}
	switch f {
	case CI8:
		for i := range dst {
			a, b := int8(src[2*i]), int8(src[2*i+1])
			if a == -128 || a == 127 || b == -128 || b == 127 {
				clipped++
			}
			dst[i] = complex(float32(a)*(1.0/128), float32(b)*(1.0/128))
		}
	case CU8:
		for i := range dst {
			a, b := src[2*i], src[2*i+1]
			if a == 0 || a == 255 || b == 0 || b == 255 {
				clipped++
			}
			dst[i] = complex((float32(a)-127.5)*(1.0/127.5), (float32(b)-127.5)*(1.0/127.5))
		}
	case CI16LE:
		src = src[:4*len(dst)]
		if useVectorDecode {
			n, c := decodeCI16LEVector(dst, src)
			clipped, dst, src = c, dst[n:], src[4*n:]
		}
		for i := range dst {
			w := binary.LittleEndian.Uint32(src[4*i:])
			clipped += clip16(uint16(w)) | clip16(uint16(w>>16))
			dst[i] = complex(float32(int16(w))*(1.0/32768), float32(int16(w>>16))*(1.0/32768))
		}
	case CI16BE:
		src = src[:4*len(dst)]
		for i := range dst {
			a, b := binary.BigEndian.Uint16(src[4*i:]), binary.BigEndian.Uint16(src[4*i+2:])
			clipped += clip16(a) | clip16(b)
			dst[i] = complex(float32(int16(a))*(1.0/32768), float32(int16(b))*(1.0/32768))
		}
	case CU16LE, CU16BE:
		src = src[:4*len(dst)]
		for i := range dst {
			var a, b uint16
			if f == CU16LE {
				a, b = binary.LittleEndian.Uint16(src[4*i:]), binary.LittleEndian.Uint16(src[4*i+2:])
			} else {
				a, b = binary.BigEndian.Uint16(src[4*i:]), binary.BigEndian.Uint16(src[4*i+2:])
			}
			// An offset-binary code is clipped at 0 and 0xFFFF, the signed
			// extremes with the top bit flipped.
			clipped += clip16(a^0x8000) | clip16(b^0x8000)
			dst[i] = complex((float32(a)-32767.5)*(1.0/32767.5), (float32(b)-32767.5)*(1.0/32767.5))
		}
	case CI32LE, CI32BE:
		src = src[:8*len(dst)]
		for i := range dst {
			var a, b int32
			if f == CI32LE {
				a, b = int32(binary.LittleEndian.Uint32(src[8*i:])), int32(binary.LittleEndian.Uint32(src[8*i+4:]))
			} else {
				a, b = int32(binary.BigEndian.Uint32(src[8*i:])), int32(binary.BigEndian.Uint32(src[8*i+4:]))
			}
			if a == math.MinInt32 || a == math.MaxInt32 || b == math.MinInt32 || b == math.MaxInt32 {
				clipped++
			}
			dst[i] = complex(float32(float64(a)/2147483648), float32(float64(b)/2147483648))
		}
	case CU32LE, CU32BE:
		src = src[:8*len(dst)]
		for i := range dst {
			var a, b uint32
			if f == CU32LE {
				a, b = binary.LittleEndian.Uint32(src[8*i:]), binary.LittleEndian.Uint32(src[8*i+4:])
			} else {
				a, b = binary.BigEndian.Uint32(src[8*i:]), binary.BigEndian.Uint32(src[8*i+4:])
			}
			if a == 0 || a == math.MaxUint32 || b == 0 || b == math.MaxUint32 {
				clipped++
			}
			dst[i] = complex(float32((float64(a)-2147483647.5)/2147483647.5), float32((float64(b)-2147483647.5)/2147483647.5))
		}
	case CF32LE, CF32BE:
		src = src[:8*len(dst)]
		for i := range dst {
			var a, b float32
			if f == CF32LE {
				a, b = math.Float32frombits(binary.LittleEndian.Uint32(src[8*i:])), math.Float32frombits(binary.LittleEndian.Uint32(src[8*i+4:]))
			} else {
				a, b = math.Float32frombits(binary.BigEndian.Uint32(src[8*i:])), math.Float32frombits(binary.BigEndian.Uint32(src[8*i+4:]))
			}
			if !finite32(a) || !finite32(b) {
				bad++
				a, b = 0, 0
			} else if a >= 1 || a <= -1 || b >= 1 || b <= -1 {
				clipped++
			}
			dst[i] = complex(a, b)
		}
	case CF64LE, CF64BE:
		src = src[:16*len(dst)]
		for i := range dst {
			var a, b float64
			if f == CF64LE {
				a, b = math.Float64frombits(binary.LittleEndian.Uint64(src[16*i:])), math.Float64frombits(binary.LittleEndian.Uint64(src[16*i+8:]))
			} else {
				a, b = math.Float64frombits(binary.BigEndian.Uint64(src[16*i:])), math.Float64frombits(binary.BigEndian.Uint64(src[16*i+8:]))
			}
			if math.IsNaN(a) || math.IsInf(a, 0) || math.IsNaN(b) || math.IsInf(b, 0) {
				bad++
				a, b = 0, 0
			} else if a >= 1 || a <= -1 || b >= 1 || b <= -1 {
				clipped++
				// Beyond the float32 range the conversion would give Inf.
				a = max(-math.MaxFloat32, min(a, math.MaxFloat32))
				b = max(-math.MaxFloat32, min(b, math.MaxFloat32))
			}
			dst[i] = complex(float32(a), float32(b))
		}
	default:
		panic("ingest: Decode of unknown format")
	}
	return clipped, bad
}

// DecodeReal converts len(dst) real values from src (which must hold
// exactly len(dst)·SampleBytes bytes) of real format f into dst, with the
// scaling of the complex twin (ri16_le as ci16_le, ...): a real value
// decodes exactly as the same code does as I or Q. It returns the number of
// values at the format's most negative or most positive code (for floats,
// magnitude ≥ 1; an rf64 value beyond the float32 range is saturated) and
// the number of NaN or infinite floats, which become 0.
//
// (The Reader decodes real data faster, two values at a time as the I and
// Q of the complex twin; TestDecodeRealPairs checks the two agree.)
func (f Format) DecodeReal(dst []float32, src []byte) (clipped, bad int) {
	if !f.IsReal() {
		panic("ingest: DecodeReal of a complex format (use Decode)")
	}
	if len(src) != len(dst)*f.SampleBytes() {
		panic("ingest: DecodeReal length mismatch")
	}
	le := f == RI16LE || f == RU16LE || f == RI32LE || f == RU32LE || f == RF32LE || f == RF64LE
	var bo binary.ByteOrder = binary.BigEndian
	if le {
		bo = binary.LittleEndian
	}
	switch f {
	case RI8:
		for i := range dst {
			v := int8(src[i])
			if v == -128 || v == 127 {
				clipped++
			}
			dst[i] = float32(v) * (1.0 / 128)
		}
	case RU8:
		for i := range dst {
			v := src[i]
			if v == 0 || v == 255 {
				clipped++
			}
			dst[i] = (float32(v) - 127.5) * (1.0 / 127.5)
		}
	case RI16LE, RI16BE:
		for i := range dst {
			v := bo.Uint16(src[2*i:])
			clipped += clip16(v)
			dst[i] = float32(int16(v)) * (1.0 / 32768)
		}
	case RU16LE, RU16BE:
		for i := range dst {
			v := bo.Uint16(src[2*i:])
			clipped += clip16(v ^ 0x8000)
			dst[i] = (float32(v) - 32767.5) * (1.0 / 32767.5)
		}
	case RI32LE, RI32BE:
		for i := range dst {
			v := int32(bo.Uint32(src[4*i:]))
			if v == math.MinInt32 || v == math.MaxInt32 {
				clipped++
			}
			dst[i] = float32(float64(v) / 2147483648)
		}
	case RU32LE, RU32BE:
		for i := range dst {
			v := bo.Uint32(src[4*i:])
			if v == 0 || v == math.MaxUint32 {
				clipped++
			}
			dst[i] = float32((float64(v) - 2147483647.5) / 2147483647.5)
		}
	case RF32LE, RF32BE:
		for i := range dst {
			v := math.Float32frombits(bo.Uint32(src[4*i:]))
			if !finite32(v) {
				bad++
				v = 0
			} else if v >= 1 || v <= -1 {
				clipped++
			}
			dst[i] = v
		}
	case RF64LE, RF64BE:
		for i := range dst {
			v := math.Float64frombits(bo.Uint64(src[8*i:]))
			if math.IsNaN(v) || math.IsInf(v, 0) {
				bad++
				v = 0
			} else if v >= 1 || v <= -1 {
				clipped++
				v = max(-math.MaxFloat32, min(v, math.MaxFloat32))
			}
			dst[i] = float32(v)
		}
	}
	return clipped, bad
}

// CheapDecode reports whether decoding f costs next to nothing beside the
// analysis (ci16_le with the vector decoder, a fraction of a nanosecond a
// sample), so that a second consumer may as well decode the raw bytes
// itself.
func (f Format) CheapDecode() bool { return f == CI16LE && useVectorDecode }

// useVectorDecode selects the AVX2 ci16_le decoder (decode_amd64.s) where
// the CPU has it; it gives the same samples and clip count as the Go loop
// (TestVectorDecode), which tests compare it with.
var useVectorDecode = hasVectorDecode

// clip16 is 1 if the two's-complement code v is −32768 or 32767, the
// extremes a saturating converter outputs, else 0: v+1 is then 0x8000 or
// 0x8001.
func clip16(v uint16) int {
	if (v+1)&0xfffe == 0x8000 {
		return 1
	}
	return 0
}

func finite32(v float32) bool {
	return v == v && v <= math.MaxFloat32 && v >= -math.MaxFloat32
}

// Encode converts src into dst (len(src)·SampleBytes bytes) in complex
// format f. Components beyond full scale are saturated to the format's
// extreme codes, never wrapped, and the number of samples so clipped is
// returned. Floats are written as they are and never clip.
func (f Format) Encode(dst []byte, src []complex64) (clipped int) {
	if f.IsReal() {
		panic("ingest: Encode of a real format (use EncodeReal)")
	}
	if len(dst) != len(src)*f.SampleBytes() {
		panic("ingest: Encode length mismatch")
	}
	if !f.Valid() {
		panic("ingest: Encode of unknown format")
	}
	enc := newComponentEncoder(f)
	w := componentBytes[f]
	for i, v := range src {
		ca := enc.put(dst[2*w*i:], real(v))
		cb := enc.put(dst[2*w*i+w:], imag(v))
		if ca || cb {
			clipped++
		}
	}
	return clipped
}

// EncodeReal converts the real values src into dst (len(src)·SampleBytes
// bytes) in real format f, as Encode does for complex ones: values beyond
// full scale are saturated and counted, floats are written as they are.
func (f Format) EncodeReal(dst []byte, src []float32) (clipped int) {
	if !f.IsReal() {
		panic("ingest: EncodeReal of a complex format (use Encode)")
	}
	if len(dst) != len(src)*f.SampleBytes() {
		panic("ingest: EncodeReal length mismatch")
	}
	enc := newComponentEncoder(f.complexTwin())
	w := componentBytes[f]
	for i, v := range src {
		if enc.put(dst[w*i:], v) {
			clipped++
		}
	}
	return clipped
}

// componentEncoder writes one component in a complex format's component
// type: integer codes rounded to the nearest and saturated to [lo, hi],
// floats as they are.
type componentEncoder struct {
	f             Format // complex
	bo            binary.ByteOrder
	scale, offset float64
	lo, hi        float64
}

func newComponentEncoder(f Format) componentEncoder {
	e := componentEncoder{f: f, bo: binary.LittleEndian}
	switch f {
	case CI16BE, CU16BE, CI32BE, CU32BE, CF32BE, CF64BE:
		e.bo = binary.BigEndian
	}
	e.scale, e.offset = f.scale()
	switch f {
	case CI8:
		e.lo, e.hi = -128, 127
	case CU8:
		e.lo, e.hi = 0, 255
	case CI16LE, CI16BE:
		e.lo, e.hi = math.MinInt16, math.MaxInt16
	case CU16LE, CU16BE:
		e.lo, e.hi = 0, math.MaxUint16
	case CI32LE, CI32BE:
		e.lo, e.hi = math.MinInt32, math.MaxInt32
	case CU32LE, CU32BE:
		e.lo, e.hi = 0, math.MaxUint32
	}
	return e
}

// put writes x at the start of dst and reports whether it saturated.
func (e *componentEncoder) put(dst []byte, x float32) bool {
	switch e.f {
	case CF32LE, CF32BE:
		e.bo.PutUint32(dst, math.Float32bits(x))
		return false
	case CF64LE, CF64BE:
		e.bo.PutUint64(dst, math.Float64bits(float64(x)))
		return false
	}
	v := math.Round(float64(x)*e.scale + e.offset)
	sat := false
	switch {
	case v != v:
		v = e.offset
	case v < e.lo:
		v, sat = e.lo, true
	case v > e.hi:
		v, sat = e.hi, true
	}
	switch e.f {
	case CI8:
		dst[0] = byte(int8(v))
	case CU8:
		dst[0] = byte(v)
	case CI16LE, CI16BE:
		e.bo.PutUint16(dst, uint16(int16(v)))
	case CU16LE, CU16BE:
		e.bo.PutUint16(dst, uint16(v))
	case CI32LE, CI32BE:
		e.bo.PutUint32(dst, uint32(int32(v)))
	case CU32LE, CU32BE:
		e.bo.PutUint32(dst, uint32(v))
	}
	return sat
}
