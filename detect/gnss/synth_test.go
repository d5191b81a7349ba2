package gnss

import (
	"math"
	"math/rand/v2"

	"quietband/ingest/gpsca"
)

// satSpec describes one synthetic GPS L1 C/A signal of a test capture.
type satSpec struct {
	prn       int
	cn0       float64 // dB-Hz
	dopplerHz float64 // carrier frequency − L1
	codePhase float64 // chips at sample 0
	carrier   float64 // carrier phase at sample 0, rad
	powerW    float64 // if > 0, the carrier power C = A² (overrides cn0)
	bitChips  float64 // chips of the current data bit already elapsed at sample 0 (codePhase + 1023·j)
	// bits, if set, are the data bits (±1) instead of random ones: copies
	// of one signal (a meacon, a matched-power spoofer, multipath) carry
	// the same data.
	bits []float64
}

// capture is a synthetic complex-baseband recording.
type capture struct {
	fs, centerHz float64
	sigma2       float64 // complex noise variance per sample
	x            []complex64
}

// synthesize builds n samples at fs centred at centerHz: complex white
// Gaussian noise of variance sigma2 (sigma2/2 per component) plus, per
// satellite, A·d(t)·c(t)·e^{j(2π(L1−fc+fD)t+θ)} with A² = C = C/N0·N0 and
// N0 = sigma2/fs, so 10·log10(A²·fs/sigma2) equals the requested C/N0
// (REFERENCES §3 model). The code runs at ChipRate·(1 + fD/L1) (code
// Doppler matching the carrier Doppler) and the data bits d(t) = ±1
// (random, 50 bit/s) change on code epochs, every 20·1023 chips.
func synthesize(rng *rand.Rand, fs, centerHz, sigma2 float64, n int, sats []satSpec) capture {
	x := make([]complex64, n)
	s := math.Sqrt(sigma2 / 2)
	for i := range x {
		x[i] = complex(float32(s*rng.NormFloat64()), float32(s*rng.NormFloat64()))
	}
	for _, st := range sats {
		addSat(rng, x, fs, centerHz, sigma2, st)
	}
	return capture{fs: fs, centerHz: centerHz, sigma2: sigma2, x: x}
}

func addSat(rng *rand.Rand, x []complex64, fs, centerHz, sigma2 float64, st satSpec) {
	code, err := gpsca.Code(st.prn)
	if err != nil {
		panic(err)
	}
	amp := math.Sqrt(math.Pow(10, st.cn0/10) * sigma2 / fs)
	if st.powerW > 0 {
		amp = math.Sqrt(st.powerW)
	}
	rate := gpsca.CodeRate(st.dopplerHz)
	fc := gpsca.L1 - centerHz + st.dopplerHz
	const bitChips = 20 * gpsca.CodeLength
	nBits := int((st.bitChips+float64(len(x))*rate/fs)/bitChips) + 2
	bits := st.bits
	if bits == nil {
		bits = make([]float64, nBits)
		for i := range bits {
			bits[i] = float64(1 - 2*rng.IntN(2))
		}
	}
	w := 2 * math.Pi * fc / fs
	step := complex(math.Cos(w), math.Sin(w))
	chips := make([]float32, 1024)
	for n0 := 0; n0 < len(x); n0 += len(chips) {
		blk := x[n0:min(n0+len(chips), len(x))]
		ch := chips[:len(blk)]
		// Code phase of sample n: codePhase + n·rate/fs (chips).
		gpsca.SampleFloat32(ch, &code, fs, rate, st.codePhase+float64(n0)*rate/fs)
		sn, cs := math.Sincos(math.Mod(w*float64(n0)+st.carrier, 2*math.Pi))
		ph := complex(cs, sn)
		// Data bit of sample n: ⌊(bitChips + n·rate/fs)/(20·1023)⌋.
		bitOf := func(n int) float64 {
			return bits[int(math.Floor((st.bitChips+float64(n)*rate/fs)/bitChips))]
		}
		b0, b1 := bitOf(n0), bitOf(n0+len(blk)-1)
		for i := range blk {
			b := b0
			if b0 != b1 {
				b = bitOf(n0 + i)
			}
			v := complex(amp*b*float64(ch[i]), 0) * ph
			blk[i] += complex64(v)
			ph *= step
		}
	}
}

// randomSat returns a satellite with random Doppler in ±maxDop, code phase,
// carrier phase and data-bit phase.
func randomSat(rng *rand.Rand, prn int, cn0, maxDop float64) satSpec {
	cp := rng.Float64() * gpsca.CodeLength
	return satSpec{
		prn:       prn,
		cn0:       cn0,
		dopplerHz: (2*rng.Float64() - 1) * maxDop,
		codePhase: cp,
		carrier:   2 * math.Pi * rng.Float64(),
		bitChips:  cp + float64(gpsca.CodeLength*rng.IntN(20)),
	}
}
