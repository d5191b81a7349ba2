package ingest_test

import (
	"errors"
	"io"
	"math"
	"path/filepath"
	"testing"

	"quietband/ingest"
	"quietband/ingest/gpsca"
)

// The two off-the-air recordings of testdata/realdata (README.md there:
// formats, rates, LO, IF and the satellites an independent acquisition
// found in them).
var realDir = filepath.Join("..", "testdata", "realdata")

// readRealCapture opens a recording with raw settings, reads it whole with
// the front-end check and returns the capture, its samples (complex
// baseband), the levels and the check.
func readRealCapture(t *testing.T, name string, raw ingest.RawSettings) (*ingest.Capture, []complex64, ingest.Levels, ingest.FrontEnd) {
	t.Helper()
	c, err := ingest.Open(filepath.Join(realDir, name), raw)
	if err != nil {
		t.Fatal(err)
	}
	r, err := c.NewReader(1 << 14)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	r.CheckFrontEnd()
	x := make([]complex64, 0, c.Samples)
	for {
		b, err := r.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		x = append(x, b.Samples...)
	}
	fe, _ := r.FrontEnd()
	return c, x, r.Levels(), fe
}

// correlate is the non-coherent sum over ms milliseconds of the squared
// 1 ms coherent correlation of x (at rate fs, sample 0 at the file's
// start) with PRN's C/A code at codePhase chips (the chip received at
// sample 0, as the README gives it) and a carrier at dopplerHz, the code
// running at its Doppler-shifted rate (IS-GPS-200: code and carrier from
// one reference; gpsca.CodeRate). Normalised by the samples summed, so a
// mirror image and a right one compare directly.
func correlate(t *testing.T, x []complex64, fs float64, prn int, codePhase, dopplerHz float64, ms int) float64 {
	t.Helper()
	code, err := gpsca.Code(prn)
	if err != nil {
		t.Fatal(err)
	}
	rate := gpsca.CodeRate(dopplerHz)
	n := int(fs / 1000)
	var sum float64
	for k := range ms {
		var acc complex128
		for i := k * n; i < (k+1)*n; i++ {
			chip := int(math.Floor(codePhase+float64(i)*rate/fs)) % gpsca.CodeLength
			ph := -2 * math.Pi * dopplerHz * float64(i) / fs
			acc += complex128(x[i]) * complex(float64(code[chip])*math.Cos(ph), float64(code[chip])*math.Sin(ph))
		}
		sum += real(acc)*real(acc) + imag(acc)*imag(acc)
	}
	return sum / float64(ms*n*n)
}

// TestRealRecordings reads both recordings through ingest.Open with raw
// settings, as the README says they were made: the 4 MS/s one as ci8
// centred at 1575.42 MHz, the 12 MS/s one as ri8 with IF 3 MHz below a
// low-side LO of 1572.42 MHz (so centred at 1575.42 MHz, at 6 MS/s
// complex). It checks the sample counts, rates and centre, the 2-bit
// levels ±1, ±3 (README: "values ±1, ±3"), that no front-end fault shows
// (no zeros, no stuck values: the 12 MHz file's sample drop leaves no
// zeros behind), and the sign of the spectrum against the README's
// satellites: after the conversion the 12 MHz file's PRN 15 (+1744 Hz,
// code phase 228.70) and PRN 30 (−1866 Hz, 620.68) correlate at their own
// Doppler at least 10 dB above the mirror Doppler, so the converted
// stream is upright; the 4 MHz file, read as written, holds its PRN 16
// (+2576 Hz, 10.81 chips after conjugation) at −2576 Hz, the inversion
// the README describes (quietband reads the samples as they are; finding
// the inversion is the satellite meter's job). 10 ms of 1 ms coherent
// correlations; the mirror, 3.5 kHz or more away, is outside the 1 ms
// main lobe. Measured when written: 14–16 dB between the right Doppler
// and the mirror, the same between the right code phase and one 300 chips
// away; with the LO side given wrong, −14 dB: the threshold of 10 dB
// separates the two [C].
func TestRealRecordings(t *testing.T) {
	c, x, levels, fe := readRealCapture(t, "L1_20211202_084700_4MHz_IQ.bin",
		ingest.RawSettings{Format: ingest.CI8, SampleRate: 4e6, CenterHz: 1575.42e6, HasCenter: true})
	hz, ok := c.CenterHz()
	if c.Samples != 2_000_000 || c.FileSamples != 2_000_000 || c.SampleRate != 4e6 || c.Decimation != 1 || !ok || hz != 1575.42e6 || len(x) != 2_000_000 {
		t.Errorf("4 MHz file: %+v, %d samples read", c, len(x))
	}
	if levels.String() != "2-bit: levels ±1, ±3" || fe.Fault.Kind != "" || !fe.HasOccupancy {
		t.Errorf("4 MHz file: levels %q, front end %+v", levels, fe)
	}
	right := correlate(t, x, 4e6, 16, 10.81, -2576, 10)
	mirror := correlate(t, x, 4e6, 16, 10.81, 2576, 10)
	if 10*math.Log10(right/mirror) < 10 {
		t.Errorf("4 MHz file: PRN 16 at −2576 Hz only %.1f dB above +2576 Hz", 10*math.Log10(right/mirror))
	}

	c, x, levels, fe = readRealCapture(t, "L1_20211125_004000_12MHz_I.bin",
		ingest.RawSettings{Format: ingest.RI8, SampleRate: 12e6, CenterHz: 1575.42e6, HasCenter: true, IFHz: 3e6, LOSide: ingest.LowSide})
	hz, ok = c.CenterHz()
	if c.FileSamples != 1_200_000 || c.FileSampleRate != 12e6 || c.Samples != 600_000 || c.SampleRate != 6e6 ||
		c.Decimation != 2 || !ok || hz != 1575.42e6 || len(x) != 600_000 || c.IF != (ingest.IFConversion{IFHz: 3e6, Side: ingest.LowSide}) {
		t.Errorf("12 MHz file: %+v, %d samples read", c, len(x))
	}
	if levels.String() != "2-bit: levels ±1, ±3" || fe.Fault.Kind != "" || !fe.Real || fe.Samples != 1_200_000 {
		t.Errorf("12 MHz file: levels %q, front end %+v", levels, fe)
	}
	for _, s := range []struct {
		prn          int
		chip, dopHz  float64
		wantAboveDB  float64
		noiseAboveDB float64
	}{{15, 228.70, 1744, 10, 10}, {30, 620.68, -1866, 10, 10}} {
		right := correlate(t, x, 6e6, s.prn, s.chip, s.dopHz, 10)
		mirror := correlate(t, x, 6e6, s.prn, s.chip, -s.dopHz, 10)
		noise := correlate(t, x, 6e6, s.prn, s.chip+300, s.dopHz, 10) // 300 chips off: no correlation
		if d := 10 * math.Log10(right/mirror); d < s.wantAboveDB {
			t.Errorf("12 MHz file: PRN %d at %+g Hz only %.1f dB above its mirror (inverted?)", s.prn, s.dopHz, d)
		}
		if d := 10 * math.Log10(right/noise); d < s.noiseAboveDB {
			t.Errorf("12 MHz file: PRN %d at code phase %g only %.1f dB above 300 chips away (not found)", s.prn, s.chip, d)
		}
	}
}
