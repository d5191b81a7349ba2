package detect

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"testing"
	"time"

	"gonum.org/v1/gonum/dsp/fourier"

	"quietband/ingest"
)

// The real recordings of testdata/realdata (their README: a real 2-bit
// front end off the air, BSD 2-clause, LICENSE.txt beside them). What is
// in them, as the README passes it on from an independent analysis:
// satellites only, no interference, the front end's own weak spurs at
// about −580 kHz, ±511.5 kHz and ±1534.5 kHz, a passband about 2.6 dB from
// flat. These tests hold the detectors to that: no band noise, sweep or
// pulse anywhere, the spurs reported as cw, and a site baseline that
// starts learning at once although every capture carries the spurs.

// realSpursHz are the 4 MS/s recording's spurs (testdata/realdata/README.md).
var realSpursHz = []float64{-580e3, -511.5e3, 511.5e3, -1534.5e3, 1534.5e3}

// realSettings are the 4 MS/s recording's raw settings (its README).
var realSettings = ingest.RawSettings{Format: ingest.CI8, SampleRate: 4e6, CenterHz: 1575.42e6, HasCenter: true,
	Start: time.Date(2021, 12, 2, 8, 47, 0, 0, time.UTC)}

const realFile = "L1_20211202_084700_4MHz_IQ.bin"

// realPipeline is a site's pipeline: satellites measured (their code
// lines are part of the band), state st.
func realPipeline(st *State) *Pipeline {
	p := NewPipeline(Config{}, st)
	p.GNSS = &GNSSMeter{}
	return p
}

// checkRealEvents fails on any event that is not cw, and on any cw tone
// that is not one of the recording's spurs (within 2 bins, the README
// giving them to 0.5 kHz); it returns which spurs were reported.
func checkRealEvents(t *testing.T, what string, evs []Event, fs float64) map[float64]bool {
	t.Helper()
	bin := fs / float64(DefaultFFTSize(fs))
	seen := map[float64]bool{}
	for _, e := range evs {
		if e.Class != ClassCW {
			t.Errorf("%s: %s event at %+.1f kHz, %.1f kHz wide, J/N %.1f dB: the recording holds no interference",
				what, e.Class, e.OffsetHz/1e3, e.BandwidthHz/1e3, e.JNDB)
			continue
		}
		for _, tone := range e.Params.Tones {
			spur := math.NaN()
			for _, s := range realSpursHz {
				if math.Abs(tone.OffsetHz-s) <= 2*bin {
					spur = s
				}
			}
			if math.IsNaN(spur) {
				t.Errorf("%s: cw tone at %+.3f kHz (J/N %.1f dB) is none of the recording's spurs", what, tone.OffsetHz/1e3, tone.JNDB)
				continue
			}
			seen[spur] = true
		}
	}
	return seen
}

// TestRealRecordingOneCapture: the whole 0.5 s recording as a site's first
// capture (no baseline): its spurs as cw (all five), nothing else.
func TestRealRecordingOneCapture(t *testing.T) {
	c, err := ingest.Open(filepath.Join("..", "testdata", "realdata", realFile), realSettings)
	if err != nil {
		t.Fatal(err)
	}
	res, err := realPipeline(NewState()).Process(context.Background(), c, realFile)
	if err != nil {
		t.Fatal(err)
	}
	seen := checkRealEvents(t, realFile, res.Events, c.SampleRate)
	for _, s := range realSpursHz {
		if !seen[s] {
			t.Errorf("spur at %+.1f kHz not reported", s/1e3)
		}
	}
	if n := len(res.Record.Stats.Satellites); n < 6 {
		t.Errorf("%d satellites measured, the README lists 7 strong ones", n)
	}
}

// TestRealRecordingFourCaptures: the recording cut into four 125 ms raw
// captures 125 ms apart, analysed in a row as one site: nothing but the
// spurs in any, and the baseline learned from the first capture (which
// holds the spurs: the baseline learns outside the cells events occupy)
// and in use from the second on.
func TestRealRecordingFourCaptures(t *testing.T) {
	data, err := os.ReadFile(filepath.Join("..", "testdata", "realdata", realFile))
	if err != nil {
		t.Fatal(err)
	}
	const parts = 4
	dir := t.TempDir()
	p := realPipeline(NewState())
	size := len(data) / parts
	for i := range parts {
		name := filepath.Join(dir, "part"+string(rune('1'+i))+".cs8")
		if err := os.WriteFile(name, data[i*size:(i+1)*size], 0o644); err != nil {
			t.Fatal(err)
		}
		rs := realSettings
		rs.Start = rs.Start.Add(time.Duration(i) * 125 * time.Millisecond)
		c, err := ingest.Open(name, rs)
		if err != nil {
			t.Fatal(err)
		}
		res, err := p.Process(context.Background(), c, filepath.Base(name))
		if err != nil {
			t.Fatal(err)
		}
		checkRealEvents(t, filepath.Base(name), res.Events, c.SampleRate)
		if b := res.Record.Stats.Baseline; i > 0 && b != "learned" {
			t.Errorf("capture %d: baseline %q, want learned from the captures before", i+1, b)
		}
	}
}

// TestRealRecordingIF: the 12 MS/s real-IF recording (ri8, IF 3 MHz,
// low-side LO; README) as one capture without a baseline: no event but
// cw, each of whose tones is a line that an independent periodogram of
// the file's raw real samples shows (its README names no spur; this one
// has a pair at IF 3 MHz ∓ 2.58 MHz, about 13 dB over the neighbouring
// 1 kHz bins [C: rawLineDB]); and its sample drop near 87 ms stated as a
// front-end gap.
func TestRealRecordingIF(t *testing.T) {
	const file = "L1_20211125_004000_12MHz_I.bin"
	path := filepath.Join("..", "testdata", "realdata", file)
	c, err := ingest.Open(path, ingest.RawSettings{Format: ingest.RI8, SampleRate: 12e6,
		CenterHz: 1575.42e6, HasCenter: true, IFHz: 3e6, LOSide: ingest.LowSide})
	if err != nil {
		t.Fatal(err)
	}
	res, err := realPipeline(NewState()).Process(context.Background(), c, file)
	if err != nil {
		t.Fatal(err)
	}
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range res.Events {
		if e.Class != ClassCW {
			t.Errorf("%s: %s event at %+.1f kHz, J/N %.1f dB: the recording holds no interference", file, e.Class, e.OffsetHz/1e3, e.JNDB)
			continue
		}
		for _, tone := range e.Params.Tones {
			// Low-side LO: RF offset o is at IF 3 MHz + o in the real samples.
			if db := rawLineDB(raw, 12e6, 3e6+tone.OffsetHz); db < 6 {
				t.Errorf("%s: cw tone at %+.3f kHz, but the raw samples show no line there (%.1f dB over its neighbours)", file, tone.OffsetHz/1e3, db)
			} else {
				t.Logf("cw tone at %+.3f kHz: a line %.1f dB over its neighbours in the raw samples", tone.OffsetHz/1e3, db)
			}
		}
	}
	if f := res.Record.Fault; f == nil || f.Kind != FaultGap {
		t.Errorf("%s: fault %+v, want the sample drop as a gap", file, f)
	}
}

// rawLineDB is an independent check of a line in real int8 samples at
// rate fs: a Hann-windowed periodogram with 1 kHz bins (gonum's FFT, not
// quietband's reader or bank), averaged over the file, and the power of
// the strongest bin within ±2 kHz of f over the mean of the bins 5 to
// 50 kHz away on both sides, in dB.
func rawLineDB(b []byte, fs, f float64) float64 {
	n := int(fs / 1e3)
	fft := fourier.NewFFT(n)
	x := make([]float64, n)
	psd := make([]float64, n/2+1)
	var c []complex128
	for off := 0; off+n <= len(b); off += n {
		for i := range x {
			x[i] = float64(int8(b[off+i])) * (0.5 - 0.5*math.Cos(2*math.Pi*float64(i)/float64(n)))
		}
		c = fft.Coefficients(c, x)
		for k := range psd {
			psd[k] += real(c[k])*real(c[k]) + imag(c[k])*imag(c[k])
		}
	}
	k0 := int(math.Round(f / 1e3))
	peak := 0.0
	for k := k0 - 2; k <= k0+2; k++ {
		peak = math.Max(peak, psd[k])
	}
	var sum float64
	m := 0
	for d := 5; d <= 50; d++ {
		sum += psd[k0-d] + psd[k0+d]
		m += 2
	}
	return 10 * math.Log10(peak/(sum/float64(m)))
}
