package gnss

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"quietband/ingest/gpsca"
)

// measure runs a Meter over x in blocks of blk samples.
func measure(t testing.TB, m *Meter, fs float64, x []complex64, blk int) Measurement {
	t.Helper()
	if err := m.Start(fs, gpsca.L1); err != nil {
		t.Fatal(err)
	}
	for i := 0; i < len(x); i += blk {
		m.Block(int64(i), x[i:min(i+blk, len(x))])
	}
	return m.Result()
}

// conjugate returns conj(x): the capture with I and Q swapped up to a
// 90° rotation, i.e. its spectrum inverted (REFERENCES §12.2).
func conjugate(x []complex64) []complex64 {
	y := make([]complex64, len(x))
	for i, v := range x {
		y[i] = complex(real(v), -imag(v))
	}
	return y
}

// skyWithClock returns satellites at the given C/N0 levels on distinct
// random PRNs, each with a geometric Doppler within ±4.5 kHz plus the
// common receiver clock offset clockHz (REFERENCES §12.5: the offset shifts
// every carrier, and with a shared reference the code by the same
// ratio 1540, so code Doppler stays f_D/1540; synthesize keeps it so).
func skyWithClock(rng *rand.Rand, levels []float64, clockHz float64) []satSpec {
	var sats []satSpec
	for i, p := range rng.Perm(32)[:len(levels)] {
		s := randomSat(rng, p+1, levels[i], 4500)
		s.dopplerHz += clockHz
		sats = append(sats, s)
	}
	return sats
}

// truthMedian is the median of the satellites' true Dopplers: the
// statistic ClockOffset reports, computed from the synthesized truth.
func truthMedian(sats []satSpec) float64 {
	var f []float64
	for _, s := range sats {
		f = append(f, s.dopplerHz)
	}
	slices.Sort(f)
	n := len(f)
	if n%2 == 1 {
		return f[n/2]
	}
	return (f[n/2-1] + f[n/2]) / 2
}

// checkSats compares a measurement with the truth: every satellite found,
// no other PRN, tracked values within the tolerances of the tracker tests
// (Doppler 10 Hz, code phase 0.08 chip, C/N0 within 2 dB: a single 0.25 s
// estimate scatters by up to about 0.85 dB, TestTrackCN0Accuracy).
func checkSats(t *testing.T, what string, r Measurement, sats []satSpec) {
	t.Helper()
	for _, s := range sats {
		i := slices.IndexFunc(r.Satellites, func(m Measured) bool { return m.PRN == s.prn })
		if i < 0 {
			t.Errorf("%s: PRN %d (%.0f dB-Hz, %+.0f Hz) not found", what, s.prn, s.cn0, s.dopplerHz)
			continue
		}
		m := r.Satellites[i]
		if m.Method != MethodTracked {
			t.Errorf("%s: PRN %d method %q", what, s.prn, m.Method)
		}
		if d := m.DopplerHz - s.dopplerHz; math.Abs(d) > 10 {
			t.Errorf("%s: PRN %d Doppler error %.1f Hz", what, s.prn, d)
		}
		if d := chipErr(m.CodePhaseChips, s.codePhase); math.Abs(d) > 0.08 {
			t.Errorf("%s: PRN %d code phase error %.3f chips", what, s.prn, d)
		}
		if d := m.CN0dBHz - s.cn0; math.Abs(d) > 2 {
			t.Errorf("%s: PRN %d C/N0 error %.2f dB", what, s.prn, d)
		}
	}
	for _, m := range r.Satellites {
		if !slices.ContainsFunc(sats, func(s satSpec) bool { return s.prn == m.PRN }) {
			t.Errorf("%s: false PRN %d (%+v)", what, m.PRN, m)
		}
	}
}

// TestMeterClockOffset: a receiver clock offset of ±10 kHz on top of the
// geometric Dopplers (REFERENCES §12.5: a 6 ppm reference) is found by
// the default search (±(5 + 10) kHz), and the reported clock offset lies
// within 20 Hz of the median of the true Dopplers (the statistic
// ClockOffset defines, computed from the synthesized truth). The next
// capture of the same input is searched narrowly around the learned
// offset and finds the same satellites.
func TestMeterClockOffset(t *testing.T) {
	const fs = 4e6
	rng := rand.New(rand.NewPCG(71, 1))
	for _, clock := range []float64{10000, -10000, 3150} {
		t.Run(fmt.Sprintf("%+gHz", clock), func(t *testing.T) {
			m := NewMeter(MeterConfig{})
			sats := skyWithClock(rng, []float64{40, 43, 46, 49}, clock)
			for capture := range 2 {
				c := synthesize(rng, fs, gpsca.L1, 1, int(0.25*fs), sats)
				r := measure(t, m, fs, c.x, 65536)
				what := fmt.Sprintf("capture %d", capture)
				checkSats(t, what, r, sats)
				if r.WideSearch != (capture == 0) {
					t.Errorf("%s: wide search %v", what, r.WideSearch)
				}
				want := truthMedian(sats)
				if !r.HasClock || math.Abs(r.ClockOffsetHz-want) > 20 {
					t.Errorf("%s: clock offset %.1f Hz (%v), truth median %.1f Hz", what, r.ClockOffsetHz, r.HasClock, want)
				}
				if r.Inverted == nil || *r.Inverted {
					t.Errorf("%s: orientation %v, want upright", what, r.Inverted)
				}
			}
		})
	}
}

// TestMeterInversion: the same sky in an inverted capture (conjugated
// samples, REFERENCES §12.2) is found inverted from the satellites' code
// and carrier Dopplers, and measured on the corrected samples: upright
// Dopplers, code phases and C/N0 as in TestMeterClockOffset. The next
// capture starts in the learned orientation; a forced orientation is
// reported as set.
func TestMeterInversion(t *testing.T) {
	const fs = 4e6
	rng := rand.New(rand.NewPCG(72, 1))
	for _, clock := range []float64{0, 7000} {
		t.Run(fmt.Sprintf("clock%+gHz", clock), func(t *testing.T) {
			m := NewMeter(MeterConfig{})
			sats := skyWithClock(rng, []float64{39, 42, 45, 47, 50}, clock)
			for capture := range 2 {
				c := synthesize(rng, fs, gpsca.L1, 1, int(0.3*fs), sats)
				r := measure(t, m, fs, conjugate(c.x), 65536)
				what := fmt.Sprintf("capture %d", capture)
				if r.Inverted == nil || !*r.Inverted {
					t.Fatalf("%s: orientation %v, want inverted (notes %q)", what, r.Inverted, r.Notes)
				}
				checkSats(t, what, r, sats)
				if want := truthMedian(sats); math.Abs(r.ClockOffsetHz-want) > 20 {
					t.Errorf("%s: clock offset %.1f Hz, truth median %.1f Hz", what, r.ClockOffsetHz, want)
				}
				if wantRestart := capture == 0; (m.restarts > 0) != wantRestart {
					t.Errorf("%s: %d tracker restarts", what, m.restarts)
				}
			}
		})
	}
	t.Run("forced", func(t *testing.T) {
		inv := true
		m := NewMeter(MeterConfig{Inverted: &inv})
		sats := skyWithClock(rng, []float64{42, 46}, 0)
		c := synthesize(rng, fs, gpsca.L1, 1, int(0.25*fs), sats)
		r := measure(t, m, fs, conjugate(c.x), 65536)
		if r.Inverted == nil || !*r.Inverted || m.restarts != 0 {
			t.Errorf("forced inverted: reported %v, %d restarts", r.Inverted, m.restarts)
		}
		checkSats(t, "forced", r, sats)
	})
}

// TestMeterShortCaptures: below the 10 ms snapshot nothing is measured
// and a note says so; from 10 ms up to the ~110 ms that tracking needs
// (60 ms pull-in + 50 prompts) the acquired satellites are reported with
// method "acquired" (Doppler within 80 Hz and code phase within ¼ chip,
// the bounds of TestAcquireDetection; C/N0 from the acquisition peak
// within 3 dB) and the capture is marked unmeasured for C/N0 comparisons;
// from about 110 ms on they are tracked.
func TestMeterShortCaptures(t *testing.T) {
	const fs = 4e6
	rng := rand.New(rand.NewPCG(73, 1))
	sats := skyWithClock(rng, []float64{41, 44, 47}, 0)
	for _, ms := range []int{1, 9, 10, 50, 100, 130} {
		t.Run(fmt.Sprintf("%dms", ms), func(t *testing.T) {
			c := synthesize(rng, fs, gpsca.L1, 1, ms*int(fs/1e3), sats)
			r := measure(t, NewMeter(MeterConfig{}), fs, c.x, 16384)
			switch {
			case ms < 10:
				if len(r.Satellites) != 0 || r.Unmeasured == "" || len(r.Notes) == 0 || !strings.Contains(r.Notes[0], "shorter than the 10 ms") {
					t.Errorf("%+v", r)
				}
				return
			case ms < 110:
				if r.Unmeasured == "" || !slices.ContainsFunc(r.Notes, func(n string) bool { return strings.Contains(n, "too short to track") }) {
					t.Errorf("no too-short note: %+v", r)
				}
			default:
				if r.Unmeasured != "" {
					t.Errorf("unmeasured: %s", r.Unmeasured)
				}
			}
			for _, s := range sats {
				i := slices.IndexFunc(r.Satellites, func(m Measured) bool { return m.PRN == s.prn })
				if i < 0 {
					t.Errorf("PRN %d not found", s.prn)
					continue
				}
				m := r.Satellites[i]
				want := MethodAcquired
				if ms >= 110 {
					want = MethodTracked
				}
				if m.Method != want {
					t.Errorf("PRN %d: method %s, want %s", s.prn, m.Method, want)
				}
				if d := m.DopplerHz - s.dopplerHz; math.Abs(d) > 80 {
					t.Errorf("PRN %d: Doppler error %.1f Hz", s.prn, d)
				}
				if d := chipErr(m.CodePhaseChips, s.codePhase); math.Abs(d) > 0.25 {
					t.Errorf("PRN %d: code phase error %.3f chips", s.prn, d)
				}
				if d := m.CN0dBHz - s.cn0; math.Abs(d) > 3 {
					t.Errorf("PRN %d (%s): C/N0 error %.2f dB", s.prn, m.Method, d)
				}
			}
			if len(r.Satellites) != len(sats) {
				t.Errorf("%d satellites reported: %+v", len(r.Satellites), r.Satellites)
			}
		})
	}
}

// TestMeterSite: what a Meter learned of a site (Site) centres the next
// search only where it is given back (SetSite): the zero Site, or one
// learned at another rate, leaves the whole clock range to search (the
// search window of TestMeterClockOffset: wide while the offset is
// unknown, narrow around it afterwards).
func TestMeterSite(t *testing.T) {
	const fs = 4e6
	rng := rand.New(rand.NewPCG(73, 1))
	sats := skyWithClock(rng, []float64{43, 46, 49}, 8000)
	c := synthesize(rng, fs, gpsca.L1, 1, int(0.15*fs), sats)
	m := NewMeter(MeterConfig{})
	if r := measure(t, m, fs, c.x, 65536); !r.WideSearch || !r.HasClock {
		t.Fatalf("first capture: wide search %v, clock %v", r.WideSearch, r.HasClock)
	}
	learned := m.Site()
	other := NewMeter(MeterConfig{})
	measure(t, other, 2*fs, make([]complex64, int(0.02*fs)), 65536)
	elsewhere := other.Site()
	for _, tc := range []struct {
		name string
		site Site
		wide bool
	}{{"given back", learned, false}, {"zero", Site{}, true}, {"another rate", elsewhere, true}} {
		if err := m.Start(fs, gpsca.L1); err != nil {
			t.Fatal(err)
		}
		m.SetSite(tc.site)
		for i := 0; i < len(c.x); i += 65536 {
			m.Block(int64(i), c.x[i:min(i+65536, len(c.x))])
		}
		r := m.Result()
		if r.WideSearch != tc.wide {
			t.Errorf("%s: wide search %v, want %v", tc.name, r.WideSearch, tc.wide)
		}
		checkSats(t, tc.name, r, sats)
	}
}
