package synth

import (
	"math"
	"math/cmplx"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"quietband/ingest"
)

// readRealFile decodes the real samples of a SigMF real capture's data
// file.
func readRealFile(t *testing.T, dir string, tr Truth) []float32 {
	t.Helper()
	f, err := ingest.ParseFormat(tr.Format)
	if err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(filepath.Join(dir, strings.TrimSuffix(tr.Capture, ingest.MetaExt)+ingest.DataExt))
	if err != nil {
		t.Fatal(err)
	}
	out := make([]float32, len(b)/f.SampleBytes())
	f.DecodeReal(out, b)
	return out
}

// realTone is |(1/M)·Σ x[m]·e^{−j2πfm/fs}| over the real samples x.
func realTone(x []float32, f, fs float64) float64 {
	var acc complex128
	for m, v := range x {
		_, frac := math.Modf(f / fs * float64(m))
		acc += complex(float64(v), 0) * cmplx.Rect(1, -2*math.Pi*frac)
	}
	return cmplx.Abs(acc) / float64(len(x))
}

// TestRealIF: real samples at an IF, read back through package ingest
// (mix by −IF, half-band filter, decimate by 2), are the complex capture
// the same scenario writes: the decoded stream of a ri16_le capture and
// the ci16_le capture of the same seed have the same PSD within 0.02 dB
// per bin for |f| ≤ 0.35·fs (measured 0.0015 dB; both half-band filters are flat to
// ±0.0015 dB there and their images ≥ 75 dB down, ingest's
// TestHalfBandResponse; the noise is the same realisation), and a tone's
// complex amplitude agrees within 0.01 dB and 0.01 rad (complex sample n
// on file sample 2n, zero phase). In the real file the tone at +f lies at
// IF + f with a low-side LO and at IF − f with a high-side one
// (REFERENCES §12.2), the high side decoding to the same complex stream;
// an IF of 0.22 of the file rate (the NCO path) too. The truth states
// the file's rate, the IF and the LO side.
func TestRealIF(t *testing.T) {
	t.Parallel()
	const fs, f = 4e6, 600e3
	c := Capture{DurationS: 0.1, Satellites: []Satellite{{PRN: 7, CN0DBHz: 45, DopplerHz: 1320, CodePhaseChips: 100.25}},
		Emitters: []Emitter{{Kind: KindCW, OffsetHz: f, JNDB: 10}}}
	// Through an (ideal) front end, as the real capture is: the same
	// random draws for the satellite's data bits.
	ref := withFrontEnd("ci16_le", fs, -30, 0.1, 230, &FrontEnd{}, c)
	refTr, refX := writeAndRead(t, ref)
	const n = 256
	refPSD := welch(refX, n, fs)
	refTone := toneCorrelation(refX, 0, len(refX), f, fs)
	for _, tc := range []struct {
		name   string
		realIF *RealIF
		format string
		lo     float64 // lowest offset compared, in fs
	}{
		{"fs/4 low", nil, "ri16_le", -0.35},
		{"fs/4 high", &RealIF{LOSide: "high"}, "ri16_le", -0.35},
		// Off the quarter rate the band's lower edge lies near 0 Hz of the
		// real signal, where it meets its own mirror: below −0.3·fs the
		// decoded stream is not the complex one (as a real IF sampler's
		// would not be).
		{"0.22 low", &RealIF{IFHz: 0.22 * 2 * fs, LOSide: "low"}, "rf32_le", -0.28},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := oneCapture(tc.format, fs, -30, 0.1, 230, c)
			s.RealIF = tc.realIF
			dir, truths := writeScenario(t, s)
			tr := truths[0]
			if tr.FileSampleRate != 2*fs || tr.IFHz == 0 || tr.LOSide == "" || tr.Samples != refTr.Samples {
				t.Fatalf("truth: file rate %g, IF %g, LO %q, %d samples", tr.FileSampleRate, tr.IFHz, tr.LOSide, tr.Samples)
			}
			x := readCapture(t, dir, tr)
			psd := welch(x, n, fs)
			var worst float64
			for k := range psd {
				if f := fftFreq(k, n, fs); f <= 0.35*fs && f >= tc.lo*fs {
					worst = max(worst, math.Abs(db(psd[k]/refPSD[k])))
				}
			}
			tone := toneCorrelation(x, 0, len(x), f, fs)
			da, dp := db(cmplx.Abs(tone)*cmplx.Abs(tone)/(cmplx.Abs(refTone)*cmplx.Abs(refTone))), cmplx.Phase(tone/refTone)
			t.Logf("PSD within ±0.35 fs: worst %.4f dB from the complex capture; tone %.4f dB, %.4f rad; noise power %.3f dB",
				worst, da, dp, db(meanPower(x)/meanPower(refX)))
			if worst > 0.02 {
				t.Errorf("decoded PSD %.4f dB from the complex capture's", worst)
			}
			if math.Abs(da) > 0.01 || math.Abs(dp) > 0.01 {
				t.Errorf("tone through the real IF: %.4f dB, %.4f rad from the complex capture", da, dp)
			}
			xr := readRealFile(t, dir, tr)
			if int64(len(xr)) != 2*tr.Samples {
				t.Fatalf("real file holds %d samples, want 2·%d", len(xr), tr.Samples)
			}
			up, down := realTone(xr, tr.IFHz+f, 2*fs), realTone(xr, tr.IFHz-f, 2*fs)
			if tr.LOSide == "high" {
				up, down = down, up
			}
			if db(up*up/(down*down)) < 30 {
				t.Errorf("LO %s: tone at IF ± f: %.3g where it belongs, %.3g mirrored", tr.LOSide, up, down)
			}
		})
	}
}

// TestRealIFQuantized: a 2-bit ADC on the real IF (ri8) writes only the
// levels ±1, ±3, with a magnitude-bit occupancy erfc(T/√2) = 0.3173 at
// T = σ (REFERENCES §12.3 table: p = 0.317 at 0 dB), within 0.003 (10⁶
// real samples: binomial σ 4.7·10⁻⁴). The σ per real sample equals the
// σ per component of the complex stream (x = Re{y·e^{jωm}}).
func TestRealIFQuantized(t *testing.T) {
	t.Parallel()
	s := withFrontEnd("ri8", 2e6, -30, 0.25, 240, &FrontEnd{Quantization: &Quantization{Bits: 2}}, Capture{})
	dir, truths := writeScenario(t, s)
	xr := readRealFile(t, dir, truths[0])
	var mag float64
	for _, v := range xr {
		switch c := float64(v) * 128; c {
		case 3, -3:
			mag++
		case 1, -1:
		default:
			t.Fatalf("code %g in a 2-bit real capture", c)
		}
	}
	p := mag / float64(len(xr))
	t.Logf("occupancy %.4f over %d real samples (truth %.4f)", p, len(xr), *truths[0].FrontEnd.Quantizer.MagnitudeOccupancy)
	if math.Abs(p-0.317) > 0.003 {
		t.Errorf("magnitude occupancy %.4f, REFERENCES §12.3 gives 0.317", p)
	}
	// And it reads: the Reader turns it into complex samples.
	if x := readCapture(t, dir, truths[0]); len(x) != int(truths[0].Samples) {
		t.Errorf("decoded %d samples", len(x))
	}
}

// TestRealIFErrors: real_if settings are checked, naming the key.
func TestRealIFErrors(t *testing.T) {
	t.Parallel()
	const head = "sample_rate: 4.0e6\ncaptures: [{name: c1, duration_s: 0.01}]\n"
	for _, tc := range []struct {
		yaml string
		want []string
	}{
		{"format: ci16_le\nreal_if: {lo_side: low}\n" + head, []string{"real_if needs a real-valued format", "ci16_le"}},
		{"format: ri16_le\nreal_if: {lo_side: sideways}\n" + head, []string{"real_if.lo_side", "sideways"}},
		{"format: ri16_le\nreal_if: {if_hz: 1.0e6}\n" + head, []string{"real_if.if_hz", "1e+06", "0.2–0.3"}},
		{"format: ri8\nfront_end: {iq_imbalance: {gain_error: 0.01, phase_deg: 1}}\n" + head, []string{"front_end.iq_imbalance", "real-valued"}},
		{"format: ri8\nfront_end: {dc_offset: {i: 0.01, q: 0.01}}\n" + head, []string{"front_end.dc_offset.q"}},
	} {
		_, err := ParseScenario(strings.NewReader(tc.yaml), "bad.yaml")
		if err == nil {
			t.Errorf("accepted:\n%s", tc.yaml)
			continue
		}
		for _, w := range tc.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("error %q does not mention %q", err, w)
			}
		}
	}
}

// TestRealIFRaw: raw: true writes the same real samples in a bare file
// (named by its datatype), which package ingest opens given the file's
// rate, the IF and the LO side from the truth, and whose start follows
// from its modification time as for complex raw files.
func TestRealIFRaw(t *testing.T) {
	t.Parallel()
	s := oneCapture("ri16_le", 2e6, -30, 0.05, 250, Capture{Emitters: []Emitter{{Kind: KindCW, OffsetHz: 300e3, JNDB: 6}}})
	s.RealIF = &RealIF{LOSide: "high"}
	sigDir, sig := writeScenario(t, s)
	s.Raw = true
	dir, truths := writeScenario(t, s)
	tr := truths[0]
	if filepath.Ext(tr.Capture) != ".ri16_le" {
		t.Fatalf("raw real capture named %q", tr.Capture)
	}
	raw, _ := os.ReadFile(filepath.Join(dir, tr.Capture))
	data, _ := os.ReadFile(filepath.Join(sigDir, strings.TrimSuffix(sig[0].Capture, ingest.MetaExt)+ingest.DataExt))
	if len(raw) == 0 || string(raw) != string(data) {
		t.Fatalf("raw real samples differ from the SigMF data of the same seed")
	}
	c, err := ingest.Open(filepath.Join(dir, tr.Capture), ingest.RawSettings{SampleRate: tr.FileSampleRate, IFHz: tr.IFHz, LOSide: ingest.HighSide})
	if err != nil {
		t.Fatal(err)
	}
	if c.Samples != tr.Samples || c.SampleRate != tr.SampleRate || c.FileSamples != 2*tr.Samples {
		t.Errorf("raw real capture opens as %d samples at %g (file %d), truth %d at %g", c.Samples, c.SampleRate, c.FileSamples, tr.Samples, tr.SampleRate)
	}
	if d := c.Start().Sub(tr.Start); d < -time.Millisecond || d > time.Millisecond {
		t.Errorf("raw real capture starts %v, truth %v", c.Start(), tr.Start)
	}
}
