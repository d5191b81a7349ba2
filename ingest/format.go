package ingest

import (
	"encoding/binary"
	"fmt"
	"math"
	"regexp"
	"strings"
)

// Format is a complex sample format, named as SigMF names its datatypes
// (SigMF core:datatype, e.g. "ci16_le"): interleaved I then Q, each component
// of the given width and endianness.
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
	numFormats
)

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
}

var componentBytes = [numFormats]int{0, 1, 1, 2, 2, 2, 2, 4, 4, 4, 4, 8, 8}

// Formats lists every supported format, in a stable order.
func Formats() []Format {
	out := make([]Format, 0, numFormats-1)
	for f := CI8; f < numFormats; f++ {
		out = append(out, f)
	}
	return out
}

// String returns the SigMF datatype name of f.
func (f Format) String() string {
	if f >= numFormats {
		return "unknown"
	}
	return formatNames[f]
}

// SampleBytes is the size of one complex sample (I and Q) in bytes.
func (f Format) SampleBytes() int {
	if f >= numFormats {
		return 0
	}
	return 2 * componentBytes[f]
}

// Valid reports whether f is a supported format.
func (f Format) Valid() bool { return f > FormatUnknown && f < numFormats }

// ParseFormat parses a SigMF complex datatype ("ci16_le", "cu8", "cf32_be",
// ...). The endianness suffix is mandatory for multi-byte types and absent
// for 8-bit ones, as the SigMF datatype grammar requires.
func ParseFormat(s string) (Format, error) {
	for f := CI8; f < numFormats; f++ {
		if s == formatNames[f] {
			return f, nil
		}
	}
	switch {
	case s == "":
		return FormatUnknown, fmt.Errorf("no datatype given")
	case realDatatype.MatchString(s):
		return FormatUnknown, fmt.Errorf("datatype %q is real-valued; quietband needs complex IQ (c...)", s)
	case s == "ci8_le" || s == "ci8_be" || s == "cu8_le" || s == "cu8_be":
		return FormatUnknown, fmt.Errorf("datatype %q: 8-bit types take no endianness suffix (SigMF), use %q", s, s[:3])
	case s == "ci16" || s == "cu16" || s == "ci32" || s == "cf32" || s == "cf64":
		return FormatUnknown, fmt.Errorf("datatype %q lacks the _le/_be endianness suffix SigMF requires", s)
	}
	return FormatUnknown, fmt.Errorf("unknown datatype %q (supported: %s)", s, supportedList())
}

// realDatatype is the real-valued half of the SigMF datatype ABNF.
var realDatatype = regexp.MustCompile(`^r((f32|f64|i32|i16|u32|u16)(_le|_be)|i8|u8)$`)

func supportedList() string {
	names := make([]string, 0, numFormats-1)
	for _, f := range Formats() {
		names = append(names, f.String())
	}
	return strings.Join(names, ", ")
}

// FormatForExtension maps a raw-file extension to its format: the SigMF
// datatype names themselves (".ci16_le"), and the short forms ".ci8",
// ".cu8", ".ci16" and ".cf32", which mean little-endian. The boolean is
// false for an extension that names no format.
func FormatForExtension(ext string) (Format, bool) {
	ext = strings.TrimPrefix(strings.ToLower(ext), ".")
	switch ext {
	case "ci16", "cu16", "ci32", "cf32", "cf64":
		ext += "_le"
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

// Encode converts src into dst (len(src)·SampleBytes bytes) in format f.
// Components beyond full scale are saturated to the format's extreme codes,
// never wrapped, and the number of samples so clipped is returned. Floats are
// written as they are and never clip.
func (f Format) Encode(dst []byte, src []complex64) (clipped int) {
	if len(dst) != len(src)*f.SampleBytes() {
		panic("ingest: Encode length mismatch")
	}
	switch f {
	case CF32LE, CF32BE:
		var bo binary.ByteOrder = binary.LittleEndian
		if f == CF32BE {
			bo = binary.BigEndian
		}
		for i, v := range src {
			bo.PutUint32(dst[8*i:], math.Float32bits(real(v)))
			bo.PutUint32(dst[8*i+4:], math.Float32bits(imag(v)))
		}
		return 0
	case CF64LE, CF64BE:
		var bo binary.ByteOrder = binary.LittleEndian
		if f == CF64BE {
			bo = binary.BigEndian
		}
		for i, v := range src {
			bo.PutUint64(dst[16*i:], math.Float64bits(float64(real(v))))
			bo.PutUint64(dst[16*i+8:], math.Float64bits(float64(imag(v))))
		}
		return 0
	}
	scale, offset := f.scale()
	// Integer codes span [lo, hi]; a value is rounded to the nearest code.
	var lo, hi float64
	switch f {
	case CI8:
		lo, hi = -128, 127
	case CU8:
		lo, hi = 0, 255
	case CI16LE, CI16BE:
		lo, hi = math.MinInt16, math.MaxInt16
	case CU16LE, CU16BE:
		lo, hi = 0, math.MaxUint16
	case CI32LE, CI32BE:
		lo, hi = math.MinInt32, math.MaxInt32
	default:
		panic("ingest: Encode of unknown format")
	}
	quant := func(x float32) (float64, bool) {
		v := math.Round(float64(x)*scale + offset)
		switch {
		case v != v:
			return offset, false
		case v < lo:
			return lo, true
		case v > hi:
			return hi, true
		}
		return v, false
	}
	width := componentBytes[f]
	var bo binary.ByteOrder = binary.LittleEndian
	if f == CI16BE || f == CU16BE || f == CI32BE {
		bo = binary.BigEndian
	}
	for i, v := range src {
		a, ca := quant(real(v))
		b, cb := quant(imag(v))
		if ca || cb {
			clipped++
		}
		o := 2 * width * i
		switch width {
		case 1:
			if f == CI8 {
				dst[o], dst[o+1] = byte(int8(a)), byte(int8(b))
			} else {
				dst[o], dst[o+1] = byte(a), byte(b)
			}
		case 2:
			if f == CU16LE || f == CU16BE {
				bo.PutUint16(dst[o:], uint16(a))
				bo.PutUint16(dst[o+2:], uint16(b))
			} else {
				bo.PutUint16(dst[o:], uint16(int16(a)))
				bo.PutUint16(dst[o+2:], uint16(int16(b)))
			}
		case 4:
			bo.PutUint32(dst[o:], uint32(int32(a)))
			bo.PutUint32(dst[o+4:], uint32(int32(b)))
		}
	}
	return clipped
}
