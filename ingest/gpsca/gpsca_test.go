package gpsca

import (
	"fmt"
	"hash/crc32"
	"testing"
)

// table3Ia lists, per PRN, the phase-selector taps, the G2 delay in chips and
// the first 10 chips in octal (chip 1 = MSB, grouped 1+3+3+3 bits).
// Taps, delays and octal for PRN 1–32: IS-GPS-200 Table 3-Ia (as transcribed in
// REFERENCES §1.2 [S]). PRN 33–37: taps and delays IS-GPS-200 Table 3-Ia [S];
// their octal values are computed (REFERENCES §1.2 [C], regenerated from the taps).
// The hex columns are the first and last 32 chips, logic 1 = bit 1, chip 1 =
// MSB (REFERENCES §1.2, computed by independent regeneration [C]).
var table3Ia = []struct {
	prn, a, b, delay int
	octal            uint16
	first32, last32  uint32
}{
	{1, 2, 6, 5, 01440, 0xC83949E5, 0x1270E510},
	{2, 3, 7, 6, 01620, 0xE4383E99, 0xA5A050C8},
	{3, 4, 8, 7, 01710, 0xF2388527, 0x7E480A24},
	{4, 5, 9, 8, 01744, 0xF938D8F8, 0x13BC2752},
	{5, 1, 9, 17, 01133, 0x96C46C57, 0xA6826A72},
	{6, 2, 10, 18, 01455, 0xCB46AC40, 0x7FD91779},
	{7, 1, 8, 139, 01131, 0x967FD269, 0x4ED88664},
	{8, 2, 9, 140, 01454, 0xCB1B735F, 0x8BF46172},
	{9, 3, 10, 141, 01626, 0xE5A923C4, 0x696212F9},
	{10, 2, 3, 251, 01504, 0xD1289C36, 0xDE54C600},
	{11, 3, 4, 252, 01642, 0xE8B0D470, 0xC3B24140},
	{12, 5, 6, 254, 01750, 0xFA1AE242, 0x8A38A330},
	{13, 6, 7, 255, 01764, 0xFD29EB4A, 0x698473D8},
	{14, 7, 8, 256, 01772, 0xFEB06FCE, 0x185A1BAC},
	{15, 8, 9, 257, 01775, 0xFF7CAD8C, 0x20B52F96},
	{16, 9, 10, 258, 01776, 0xFF9ACCAD, 0x3CC2B58B},
	{17, 1, 4, 469, 01156, 0x9B8044FC, 0xF87F4FC0},
	{18, 2, 5, 470, 01467, 0xCDE4B815, 0x50A785A0},
	{19, 3, 6, 471, 01633, 0xE6D6C661, 0x04CBE090},
	{20, 4, 7, 472, 01715, 0xF34FF95B, 0xAEFDD208},
	{21, 5, 8, 473, 01746, 0xF98366C6, 0xFBE6CB44},
	{22, 6, 9, 474, 01763, 0xFCE52908, 0x516B47E2},
	{23, 1, 3, 509, 01063, 0x8CF7833E, 0xF322CD00},
	{24, 4, 6, 512, 01706, 0xF1A101A3, 0x0F966250},
	{25, 5, 7, 513, 01743, 0xF8F41ABA, 0x2B531368},
	{26, 6, 8, 514, 01761, 0xFC5E9736, 0xB931ABF4},
	{27, 7, 9, 515, 01770, 0xFE0BD1F0, 0xF000F7BA},
	{28, 8, 10, 516, 01774, 0xFF217293, 0xD498599D},
	{29, 1, 6, 859, 01127, 0x95E656ED, 0x3F06EE10},
	{30, 2, 7, 860, 01453, 0xCAD7B11D, 0xB31B5548},
	{31, 3, 8, 861, 01625, 0xE54F42E5, 0x751588E4},
	{32, 4, 9, 862, 01712, 0xF2833B19, 0x9612E632},
	{33, 5, 10, 863, 01745, 0, 0},
	{34, 4, 10, 950, 01713, 0, 0},
	{35, 1, 7, 947, 01134, 0, 0},
	{36, 2, 8, 948, 01456, 0, 0},
	{37, 4, 10, 950, 01713, 0, 0},
}

func mustBits(t testing.TB, prn int) [CodeLength]uint8 {
	t.Helper()
	b, err := Bits(prn)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func mustCode(t testing.TB, prn int) [CodeLength]int8 {
	t.Helper()
	c, err := Code(prn)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

func packBits(bits []uint8) uint32 {
	var v uint32
	for _, b := range bits {
		v = v<<1 | uint32(b)
	}
	return v
}

func TestTable3Ia(t *testing.T) {
	for _, tc := range table3Ia {
		t.Run(fmt.Sprint("PRN", tc.prn), func(t *testing.T) {
			// Taps and G2 delay: IS-GPS-200 Table 3-Ia.
			a, b, ok := Taps(tc.prn)
			if !ok || a != tc.a || b != tc.b {
				t.Errorf("Taps = %d,%d,%v, want %d,%d", a, b, ok, tc.a, tc.b)
			}
			d, ok := G2Delay(tc.prn)
			if !ok || d != tc.delay {
				t.Errorf("G2Delay = %d,%v, want %d", d, ok, tc.delay)
			}
			bits := mustBits(t, tc.prn)
			// First 10 chips in octal: IS-GPS-200 Table 3-Ia (PRN 1–32 [S];
			// PRN 33–37 computed from the taps, REFERENCES §1.2 [C]).
			if got := uint16(packBits(bits[:10])); got != tc.octal {
				t.Errorf("first 10 chips %04o, want %04o", got, tc.octal)
			}
			// The first chip of every two-tap PRN is 1 (REFERENCES §1.1 [C]).
			if bits[0] != 1 {
				t.Errorf("first chip %d, want 1", bits[0])
			}
			if tc.first32 != 0 {
				// Hex columns, REFERENCES §1.2 [C] (computed by independent regeneration).
				if got := packBits(bits[:32]); got != tc.first32 {
					t.Errorf("first 32 chips %08X, want %08X", got, tc.first32)
				}
				if got := packBits(bits[CodeLength-32:]); got != tc.last32 {
					t.Errorf("last 32 chips %08X, want %08X", got, tc.last32)
				}
			}
			// Bipolar mapping logic 0 → +1, logic 1 → −1 (REFERENCES §1.1 [M],
			// fixed by the octal check above).
			code := mustCode(t, tc.prn)
			for i := range code {
				if want := int8(1 - 2*int(bits[i])); code[i] != want {
					t.Fatalf("chip %d: bipolar %d, logic %d", i, code[i], bits[i])
				}
			}
		})
	}
}

func TestUnknownPRN(t *testing.T) {
	for _, prn := range []int{-1, 0, 38, 63, 1000} {
		if _, err := Code(prn); err == nil {
			t.Errorf("Code(%d): no error", prn)
		}
		if _, err := Bits(prn); err == nil {
			t.Errorf("Bits(%d): no error", prn)
		}
		if _, _, ok := Taps(prn); ok {
			t.Errorf("Taps(%d) ok", prn)
		}
		if _, ok := G2Delay(prn); ok {
			t.Errorf("G2Delay(%d) ok", prn)
		}
	}
}

// TestBalance: every C/A code has 512 ones and 511 zeros (Borre et al. 2007
// §2 [S]; REFERENCES §1.3).
func TestBalance(t *testing.T) {
	for prn := 1; prn <= MaxPRN; prn++ {
		ones := 0
		for _, b := range mustBits(t, prn) {
			ones += int(b)
		}
		if ones != 512 {
			t.Errorf("PRN %d: %d ones, want 512", prn, ones)
		}
	}
}

func periodicCorr(x, y *[CodeLength]int8, lag int) int {
	s := 0
	for i := range x {
		s += int(x[i]) * int(y[(i+lag)%CodeLength])
	}
	return s
}

// TestCorrelation checks the three-valued periodic correlation of Gold codes:
// off-peak values only −1, −t(10) = −65 and t(10) − 2 = +63 (Gold 1967, from
// memory; values confirmed by computation, REFERENCES §1.3 [C]), and the
// exact lag counts of REFERENCES §1.3 [C] (computed by direct correlation).
func TestCorrelation(t *testing.T) {
	type corrCase struct {
		name   string
		p, q   int
		counts map[int]int // nil: only the value set is checked
		peak   bool        // lag 0 must be 1023
	}
	cases := []corrCase{
		{name: "auto PRN1", p: 1, q: 1, peak: true, counts: map[int]int{1023: 1, -1: 782, 63: 120, -65: 120}},
		{name: "cross PRN1xPRN2", p: 1, q: 2, counts: map[int]int{-1: 751, 63: 144, -65: 128}},
	}
	for prn := 2; prn <= 32; prn++ {
		cases = append(cases, corrCase{name: fmt.Sprint("auto PRN", prn), p: prn, q: prn, peak: true})
	}
	gold := map[int]bool{-1: true, -65: true, 63: true}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			x, y := mustCode(t, tc.p), mustCode(t, tc.q)
			got := map[int]int{}
			for lag := 0; lag < CodeLength; lag++ {
				v := periodicCorr(&x, &y, lag)
				got[v]++
				switch {
				case lag == 0 && tc.peak:
					if v != CodeLength {
						t.Errorf("lag 0: %d, want 1023", v)
					}
				case !gold[v]:
					t.Errorf("lag %d: %d, not in {-1,-65,+63}", lag, v)
				}
			}
			if tc.counts != nil {
				for v, n := range tc.counts {
					if got[v] != n {
						t.Errorf("value %d at %d lags, want %d", v, got[v], n)
					}
				}
			}
		})
	}
}

// mSequence returns the stage-10 output of a 10-stage register started at
// all ones with feedback = XOR of the given stages (written independently
// of the package code as an array of stages).
func mSequence(fb []int) [CodeLength]uint8 {
	var reg [11]uint8
	for i := 1; i <= 10; i++ {
		reg[i] = 1
	}
	var out [CodeLength]uint8
	for n := range out {
		out[n] = reg[10]
		var f uint8
		for _, s := range fb {
			f ^= reg[s]
		}
		copy(reg[2:], reg[1:10])
		reg[1] = f
	}
	return out
}

// TestDelayForm: the tap form equals G1(n) XOR G2(n − D mod 1023) for every
// PRN (IS-GPS-200 §3.3.2.3, delays of Table 3-Ia; equivalence verified for
// all 37 PRNs in REFERENCES §1.1 [C]).
func TestDelayForm(t *testing.T) {
	g1 := mSequence([]int{3, 10})             // G1 = 1 + X^3 + X^10, IS-GPS-200
	g2 := mSequence([]int{2, 3, 6, 8, 9, 10}) // G2 = 1 + X^2 + X^3 + X^6 + X^8 + X^9 + X^10
	for prn := 1; prn <= MaxPRN; prn++ {
		d, _ := G2Delay(prn)
		bits := mustBits(t, prn)
		for n := range bits {
			want := g1[n] ^ g2[((n-d)%CodeLength+CodeLength)%CodeLength]
			if bits[n] != want {
				t.Errorf("PRN %d chip %d: tap form %d, delay form %d", prn, n, bits[n], want)
				break
			}
		}
	}
	// PRN 34 and PRN 37 share taps and code (REFERENCES §1.2 [C]).
	if mustBits(t, 34) != mustBits(t, 37) {
		t.Error("PRN 34 and PRN 37 differ")
	}
}

// TestCRC32: CRC-32 (IEEE) of the logic chips packed MSB first into 128
// bytes with one trailing zero pad bit (REFERENCES §1.3 [C], computed with zlib).
func TestCRC32(t *testing.T) {
	for _, tc := range []struct {
		prn int
		crc uint32
	}{{1, 0xF845D034}, {2, 0x915E18E2}, {3, 0x310C68AF}, {32, 0x1854EE26}} {
		bits := mustBits(t, tc.prn)
		var buf [128]byte
		for i, b := range bits {
			buf[i/8] |= b << (7 - i%8)
		}
		if got := crc32.ChecksumIEEE(buf[:]); got != tc.crc {
			t.Errorf("PRN %d: CRC-32 %08X, want %08X", tc.prn, got, tc.crc)
		}
	}
}

func TestConstants(t *testing.T) {
	// IS-GPS-200: L1 = 154·10.23 MHz, chip rate 10.23 MHz/10 (REFERENCES §8, §1.1).
	if L1 != 154*10.23e6 || ChipRate != 10.23e6/10 || L1/ChipRate != CarrierToCodeRatio {
		t.Error("L1/chip-rate constants inconsistent with IS-GPS-200")
	}
	// Code Doppler = fD/1540 chips/s (REFERENCES §4 [C]).
	for _, fd := range []float64{-5000, 0, 1540, 4321} {
		got := CodeRate(fd) - ChipRate
		want := fd / 1540
		if d := got - want; d > 1e-9 || d < -1e-9 {
			t.Errorf("CodeRate(%v) − ChipRate = %v, want %v", fd, got, want)
		}
	}
}

// TestSample compares Sample against exact integer arithmetic:
// chip(n) = ⌊(k·fs + 2·n·R)/(2·fs)⌋ mod 1023 for startChip = k/2 and integer
// rates (the convention documented on Sample; chip k owns phase [k, k+1)).
func TestSample(t *testing.T) {
	code := mustCode(t, 7)
	cases := []struct {
		fs, rate int64
		half     int64 // startChip = half/2
		n        int
	}{
		{1023000, 1023000, 0, 3000},  // one sample per chip
		{4092000, 1023000, 0, 8000},  // four samples per chip
		{4000000, 1023000, 0, 40000}, // non-integer ratio, boundary hits at n=4000k
		{5000000, 1023003, 1, 20000}, // code Doppler, half-chip start
		{10000000, 1022997, 2045, 30000},
		{2046000, 1023000, 5, 4096},
		{20000000, 1023001, 1000, 45000},
	}
	for _, tc := range cases {
		t.Run(fmt.Sprintf("fs%d_R%d_s%d", tc.fs, tc.rate, tc.half), func(t *testing.T) {
			dst := make([]int8, tc.n)
			dstf := make([]float32, tc.n)
			start := float64(tc.half) / 2
			end := Sample(dst, &code, float64(tc.fs), float64(tc.rate), start)
			endf := SampleFloat32(dstf, &code, float64(tc.fs), float64(tc.rate), start)
			for n := range dst {
				num := tc.half*tc.fs + 2*int64(n)*tc.rate
				k := (num / (2 * tc.fs)) % CodeLength
				if dst[n] != code[k] || dstf[n] != float32(code[k]) {
					t.Fatalf("sample %d: got %d/%v, want chip %d = %d", n, dst[n], dstf[n], k, code[k])
				}
			}
			num := tc.half*tc.fs + 2*int64(tc.n)*tc.rate
			wantEnd := float64(num%(2*tc.fs*CodeLength)) / float64(2*tc.fs)
			if d := end - wantEnd; d > 1e-9 || d < -1e-9 || end != endf {
				t.Errorf("end phase %v (%v), want %v", end, endf, wantEnd)
			}
			// Continuation: two calls equal one call, except where the exact
			// phase lies within 1e-6 chip of a boundary (the carried phase is
			// a rounded float64).
			h := tc.n / 3
			part := make([]int8, tc.n)
			p := Sample(part[:h], &code, float64(tc.fs), float64(tc.rate), start)
			Sample(part[h:], &code, float64(tc.fs), float64(tc.rate), p)
			for n := range part {
				r := (tc.half*tc.fs + 2*int64(n)*tc.rate) % (2 * tc.fs)
				nearEdge := float64(min(r, 2*tc.fs-r)) < 1e-6*float64(2*tc.fs)
				if part[n] != dst[n] && !nearEdge {
					t.Fatalf("continued sampling differs at %d", n)
				}
			}
		})
	}
}

func TestSampleNegativeStart(t *testing.T) {
	code := mustCode(t, 3)
	dst := make([]int8, 3)
	// Phase −0.5 is 1022.5: chip 1022 first, then chips 0 and 1 at one sample
	// per chip (documented convention).
	Sample(dst, &code, 1e6, 1e6, -0.5)
	if dst[0] != code[1022] || dst[1] != code[0] || dst[2] != code[1] {
		t.Errorf("got %v", dst)
	}
	if WrapChips(-1e-18) != 0 && WrapChips(-1e-18) >= CodeLength {
		t.Error("WrapChips out of range")
	}
}

func TestSamplePanics(t *testing.T) {
	code := mustCode(t, 1)
	for _, tc := range []struct {
		name     string
		code     *[CodeLength]int8
		fs, rate float64
	}{{"nil", nil, 1, 1}, {"fs0", &code, 0, 1}, {"rateNeg", &code, 1, -1}} {
		t.Run(tc.name, func(t *testing.T) {
			defer func() {
				if recover() == nil {
					t.Error("no panic")
				}
			}()
			Sample(make([]int8, 1), tc.code, tc.fs, tc.rate, 0)
		})
	}
}

func TestSampleNoAlloc(t *testing.T) {
	code := mustCode(t, 1)
	dst := make([]int8, 4000)
	if n := testing.AllocsPerRun(10, func() { Sample(dst, &code, 4e6, CodeRate(1234), 17.25) }); n != 0 {
		t.Errorf("Sample allocates %v times", n)
	}
}

func BenchmarkSample4000(b *testing.B) {
	code, _ := Code(1)
	dst := make([]float32, 4000)
	for b.Loop() {
		SampleFloat32(dst, &code, 4e6, CodeRate(1234), 17.25)
	}
	b.ReportMetric(float64(len(dst))*float64(b.N)/b.Elapsed().Seconds()/1e6, "MS/s")
}
